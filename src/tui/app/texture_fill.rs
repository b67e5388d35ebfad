//! The depth view's texture fill (key `e`): the site's profile with layers that have a texture
//! class but no fitted core filled with their class estimate, kept beside the measured one.

use crate::analysis::SiteProfile;
use crate::analysis::texture::fill_profile;
use crate::analysis::water::SumInterval;
use crate::model::texture::TextureClass;

/// A layer estimated from its texture class.
#[derive(Debug, Clone, PartialEq)]
pub struct EstimatedLayer {
    /// Upper boundary, cm.
    pub top_cm: f64,
    /// Lower boundary, cm.
    pub bottom_cm: f64,
    /// Horizon label.
    pub horizon: Option<String>,
    /// Its class.
    pub class: TextureClass,
    /// Available water of the class-mean curve, m3/m3.
    pub available_water: Option<f64>,
    /// Its 95 % interval (the class spread), m3/m3.
    pub available_water_interval: Option<SumInterval>,
    /// Available water of its part of the root zone, mm.
    pub water_mm: Option<f64>,
    /// Its 95 % interval, mm.
    pub water_mm_interval: Option<SumInterval>,
}

/// The filled profile's estimated layers and totals.
#[derive(Debug, Clone, PartialEq)]
pub struct TextureFill {
    /// Layers filled from texture, top down.
    pub layers: Vec<EstimatedLayer>,
    /// The total with the estimates, mm.
    pub total_mm: f64,
    /// Its 95 % interval, mm.
    pub total_mm_interval: Option<SumInterval>,
    /// Root-zone depth still without a value, cm.
    pub uncovered_cm: f64,
}

impl TextureFill {
    /// The fill of a measured profile; `None` when no layer gets an estimate.
    pub fn of(profile: &SiteProfile) -> Option<TextureFill> {
        let mut filled = profile.clone();
        fill_profile(&mut filled, profile.fc_kpa, profile.pwp_kpa);
        let layers: Vec<EstimatedLayer> = filled
            .layers
            .iter()
            .filter_map(|l| {
                let e = l.estimate.as_ref()?;
                Some(EstimatedLayer {
                    top_cm: l.layer.top_cm,
                    bottom_cm: l.layer.bottom_cm,
                    horizon: l.horizon.clone(),
                    class: e.class,
                    available_water: l.available_water,
                    available_water_interval: l.available_water_interval,
                    water_mm: l.water_mm,
                    water_mm_interval: l.water_mm_interval,
                })
            })
            .collect();
        (!layers.is_empty()).then(|| TextureFill {
            layers,
            total_mm: filled.total_mm,
            total_mm_interval: filled.total_mm_interval,
            uncovered_cm: filled.uncovered_cm(),
        })
    }
}

/// The status line after the key.
pub fn toggled(on: bool) -> &'static str {
    if on {
        "◌ layers without a fitted core filled from their texture class (e: measured only)"
    } else {
        "measured layers only (e: fill from texture)"
    }
}

#[cfg(test)]
#[allow(clippy::float_cmp)]
mod tests {
    use super::*;
    use crate::analysis::water::LayerWater;
    use crate::model::domain::LayerRef;

    fn layer(top: f64, bottom: f64, texture: Option<TextureClass>, aw: Option<f64>) -> LayerWater {
        LayerWater {
            layer: LayerRef {
                site: "S".into(),
                top_cm: top,
                bottom_cm: bottom,
            },
            horizon: None,
            lab_cores: usize::from(aw.is_some()),
            fitted_cores: usize::from(aw.is_some()),
            stale_cores: 0,
            available_water: aw,
            available_water_interval: None,
            interval_note: None,
            field_available_water: None,
            depth_in_zone_cm: bottom.min(100.0) - top.min(100.0),
            water_mm: aw.map(|a| a * (bottom - top) * 10.0),
            water_mm_interval: None,
            texture,
            estimate: None,
        }
    }

    fn profile(layers: Vec<LayerWater>) -> SiteProfile {
        let mut p = SiteProfile {
            site: "S".into(),
            root_zone_cm: 100.0,
            fc_kpa: 33.0,
            pwp_kpa: 1500.0,
            layers,
            total_mm: 0.0,
            total_mm_interval: None,
            total_note: None,
            covered_cm: 0.0,
            between_cores: None,
        };
        crate::analysis::water::recompute_totals(&mut p);
        p
    }

    #[test]
    fn only_layers_with_a_class_and_no_core_are_filled() {
        let measured = profile(vec![
            layer(0.0, 50.0, Some(TextureClass::Loam), Some(0.1)),
            layer(50.0, 80.0, Some(TextureClass::Clay), None),
            layer(80.0, 100.0, None, None),
        ]);
        assert_eq!(measured.uncovered_cm(), 50.0);
        let fill = TextureFill::of(&measured).expect("a fill");
        assert_eq!(fill.layers.len(), 1);
        assert_eq!(fill.layers[0].class, TextureClass::Clay);
        let aw = fill.layers[0].available_water.expect("aw");
        // The clay class mean's available water, with 30 cm of it in the sum.
        assert!(
            (fill.total_mm - (50.0 + aw * 300.0)).abs() < 1e-9,
            "{fill:?}"
        );
        assert_eq!(fill.uncovered_cm, 20.0);
        assert!(
            TextureFill::of(&profile(vec![layer(0.0, 100.0, None, None)])).is_none(),
            "nothing to fill"
        );
        assert!(toggled(true).starts_with('◌'));
    }
}
