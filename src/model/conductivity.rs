//! Relative hydraulic conductivity Kr(h) = K / Ks from a retention curve, and K = Ks Kr.
//!
//! Each retention model is paired with the conductivity model published with it:
//!
//! | retention | conductivity | Kr |
//! |---|---|---|
//! | van Genuchten, m = 1 - 1/n | Mualem (1976), van Genuchten (1980) | Se^L [1 - (1 - Se^(1/m))^m]^2 |
//! | Brooks-Corey | Burdine (1953) | Se^(3 + 2/lambda) = (h_b/h)^(2 + 3 lambda) |
//! | Kosugi | Mualem, Kosugi (1996) | Se^L Q[ln(h/h_m)/sigma + sigma]^2 |
//! | Durner | Mualem, Priesack & Durner (2006) | Se^L [sum w_i alpha_i (1 - (1 - Se_i^(1/m_i))^m_i)]^2 / (sum w_i alpha_i)^2 |
//! | Campbell | Campbell (1974) | (theta/theta_s)^(2b + 3) = (h_e/h)^(2 + 3/b) |
//!
//! van Genuchten with free m and Fredlund-Xing have no closed form (Mualem's integral must be
//! evaluated numerically there): [`ConductivityModel::for_model`] returns `None` for them.
//! The pore-connectivity exponent L (Mualem 1976: 0.5) applies to the Mualem forms only;
//! Burdine's and Campbell's exponents are fixed by their derivations.

use serde::{Deserialize, Serialize};

use super::retention::durner::mode_saturations;
use super::retention::kosugi::{normal_q, z_of};
use super::retention::van_genuchten::mualem_m;
use super::retention::van_genuchten_free_m::VgTerm;
use super::retention::{ModelKind, finite, ln_sigmoid};

/// Mualem's pore-connectivity (tortuosity) exponent L when none is given (Mualem 1976).
pub const DEFAULT_PORE_CONNECTIVITY: f64 = 0.5;

/// A relative-conductivity model paired with a retention model.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ConductivityModel {
    /// Mualem (1976) with van Genuchten (1980), m = 1 - 1/n.
    MualemVanGenuchten,
    /// Burdine (1953) with Brooks-Corey (1964).
    BurdineBrooksCorey,
    /// Mualem with Kosugi (1996).
    MualemKosugi,
    /// Mualem with Durner's bimodal curve (Priesack & Durner 2006).
    MualemDurner,
    /// Campbell (1974).
    Campbell,
}

impl ConductivityModel {
    /// The conductivity model that goes with a retention model; `None` for van Genuchten with
    /// free m and Fredlund-Xing, which have no closed form.
    pub fn for_model(kind: ModelKind) -> Option<ConductivityModel> {
        match kind {
            ModelKind::VanGenuchten => Some(ConductivityModel::MualemVanGenuchten),
            ModelKind::BrooksCorey => Some(ConductivityModel::BurdineBrooksCorey),
            ModelKind::Kosugi => Some(ConductivityModel::MualemKosugi),
            ModelKind::Durner => Some(ConductivityModel::MualemDurner),
            ModelKind::Campbell => Some(ConductivityModel::Campbell),
            ModelKind::VanGenuchtenFreeM | ModelKind::FredlundXing => None,
        }
    }

    /// The published name, for reports.
    pub fn display_name(self) -> &'static str {
        match self {
            ConductivityModel::MualemVanGenuchten => "Mualem-van Genuchten",
            ConductivityModel::BurdineBrooksCorey => "Burdine-Brooks-Corey",
            ConductivityModel::MualemKosugi => "Mualem-Kosugi",
            ConductivityModel::MualemDurner => "Mualem-Durner (Priesack & Durner 2006)",
            ConductivityModel::Campbell => "Campbell",
        }
    }

    /// Whether the pore-connectivity exponent L enters this model (the Mualem forms).
    pub fn uses_pore_connectivity(self) -> bool {
        matches!(
            self,
            ConductivityModel::MualemVanGenuchten
                | ConductivityModel::MualemKosugi
                | ConductivityModel::MualemDurner
        )
    }
}

/// 1 - (1 - x)^m with x = Se^(1/m) = 1 / (1 + (alpha h)^n), as -expm1(m ln(1 - x)).
///
/// ln(1 - x) = ln((alpha h)^n / (1 + (alpha h)^n)) is evaluated as ln sigmoid(n ln(alpha h)),
/// which keeps full relative precision at both ends (soil-reference §2.7 numerical note).
#[inline]
fn mualem_bracket(term: &VgTerm, n: f64, m: f64) -> f64 {
    -(m * ln_sigmoid(n * term.ln_x)).exp_m1()
}

/// Relative conductivity Kr(h) = K(h) / Ks, in [0, 1].
///
/// `pore_connectivity` is Mualem's L (used by the Mualem forms only; see the module table).
/// `None` when the model has no closed-form conductivity or the value is not finite.
pub fn relative_conductivity(
    kind: ModelKind,
    h: f64,
    p: &[f64],
    pore_connectivity: f64,
) -> Option<f64> {
    let model = ConductivityModel::for_model(kind)?;
    let l = pore_connectivity;
    let kr = match model {
        ConductivityModel::MualemVanGenuchten => {
            let (alpha, n) = (p[2], p[3]);
            let m = mualem_m(n);
            match VgTerm::at(h, alpha, n, m) {
                None => 1.0,
                Some(t) => {
                    let bracket = mualem_bracket(&t, n, m);
                    // Se^L = exp(-L m ln(1 + (alpha h)^n)).
                    (-l * m * t.lnb).exp() * bracket * bracket
                }
            }
        }
        ConductivityModel::BurdineBrooksCorey => {
            let (h_b, lambda) = (p[2], p[3]);
            if h <= h_b {
                1.0
            } else {
                ((2.0 + 3.0 * lambda) * (h_b / h).ln()).exp()
            }
        }
        ConductivityModel::Campbell => {
            let (h_e, b) = (p[1], p[2]);
            if h <= h_e {
                1.0
            } else {
                ((2.0 + 3.0 / b) * (h_e / h).ln()).exp()
            }
        }
        ConductivityModel::MualemKosugi => {
            let (h_m, sigma) = (p[2], p[3]);
            if h <= 0.0 {
                1.0
            } else {
                let z = z_of(h, h_m, sigma);
                let q = normal_q(z + sigma);
                normal_q(z).powf(l) * q * q
            }
        }
        ConductivityModel::MualemDurner => durner_kr(h, p, l),
    };
    finite(kr)
}

/// Priesack & Durner (2006) Mualem conductivity of the bimodal curve.
fn durner_kr(h: f64, p: &[f64], l: f64) -> f64 {
    let w = [p[2], 1.0 - p[2]];
    let modes = [(p[3], p[4]), (p[5], p[6])];
    let (mut num, mut den) = (0.0, 0.0);
    for (wi, (alpha, n)) in w.into_iter().zip(modes) {
        let m = mualem_m(n);
        let bracket = VgTerm::at(h, alpha, n, m).map_or(1.0, |t| mualem_bracket(&t, n, m));
        num += wi * alpha * bracket;
        den += wi * alpha;
    }
    let (s1, s2) = mode_saturations(h, p);
    let se = w[0] * s1 + w[1] * s2;
    let ratio = num / den;
    se.powf(l) * ratio * ratio
}

/// Hydraulic conductivity K(h) = Ks Kr(h), in the unit of `ks` (cm/day in porewise's files).
///
/// `None` when the model has no closed-form conductivity or a value is not finite.
pub fn conductivity(
    kind: ModelKind,
    h: f64,
    p: &[f64],
    ks: f64,
    pore_connectivity: f64,
) -> Option<f64> {
    relative_conductivity(kind, h, p, pore_connectivity).and_then(|kr| finite(ks * kr))
}

#[cfg(test)]
#[allow(clippy::float_cmp)]
mod tests {
    use super::*;

    #[test]
    fn saturated_conductivity_at_zero_suction() {
        let cases: [(ModelKind, &[f64]); 5] = [
            (ModelKind::VanGenuchten, &[0.05, 0.4, 0.02, 1.5]),
            (ModelKind::BrooksCorey, &[0.05, 0.4, 20.0, 0.5]),
            (ModelKind::Kosugi, &[0.05, 0.4, 100.0, 1.5]),
            (ModelKind::Durner, &[0.05, 0.5, 0.4, 0.1, 3.0, 0.005, 1.5]),
            (ModelKind::Campbell, &[0.4, 20.0, 5.0]),
        ];
        for (kind, p) in cases {
            assert_eq!(
                relative_conductivity(kind, 0.0, p, 0.5),
                Some(1.0),
                "{kind}"
            );
            assert_eq!(conductivity(kind, 0.0, p, 12.5, 0.5), Some(12.5), "{kind}");
        }
    }

    #[test]
    fn models_without_a_closed_form_have_none() {
        assert_eq!(
            relative_conductivity(
                ModelKind::VanGenuchtenFreeM,
                10.0,
                &[0.05, 0.4, 0.02, 1.5, 0.3],
                0.5
            ),
            None
        );
        assert_eq!(
            relative_conductivity(
                ModelKind::FredlundXing,
                10.0,
                &[0.4, 100.0, 2.0, 1.0, 15000.0],
                0.5
            ),
            None
        );
    }
}
