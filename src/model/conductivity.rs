//! Relative hydraulic conductivity Kr(h) = K / Ks from a retention curve, and K = Ks Kr.
//!
//! Each retention model has the conductivity models published with it; the first listed is
//! the one used when none is asked for:
//!
//! | retention | conductivity | Kr |
//! |---|---|---|
//! | van Genuchten, m = 1 - 1/n | Mualem (1976), van Genuchten (1980) | Se^L [1 - (1 - Se^(1/m))^m]^2 |
//! | van Genuchten, m free | Mualem, van Genuchten (1980) | Se^L [I_z(m + 1/n, 1 - 1/n)]^2, z = Se^(1/m) |
//! | Brooks-Corey | Burdine (1953) | Se^(3 + 2/lambda) = (h_b/h)^(2 + 3 lambda) |
//! | Brooks-Corey | Mualem (1976) | Se^(L + 2 + 2/lambda) = (h_b/h)^(2 + (L + 2) lambda) |
//! | Kosugi | Mualem, Kosugi (1996) | Se^L Q[ln(h/h_m)/sigma + sigma]^2 |
//! | Durner | Mualem, Priesack & Durner (2006) | Se^L [sum w_i alpha_i (1 - (1 - Se_i^(1/m_i))^m_i)]^2 / (sum w_i alpha_i)^2 |
//! | Campbell | Campbell (1974) | (theta/theta_s)^(2b + 3) = (h_e/h)^(2 + 3/b) |
//!
//! I_z is the regularised incomplete beta function ([`crate::model::special::beta_reg`]).
//! Fredlund-Xing has no closed form (Mualem's integral with its correction term must be
//! evaluated numerically): [`ConductivityModel::for_model`] returns `None` for it.
//! The pore-connectivity exponent L (Mualem 1976: 0.5) applies to the Mualem forms only;
//! Burdine's and Campbell's exponents are fixed by their derivations.

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use super::retention::durner::mode_saturations;
use super::retention::kosugi::{normal_q, z_of};
use super::retention::van_genuchten::mualem_m;
use super::retention::van_genuchten_free_m::VgTerm;
use super::retention::{ModelKind, finite, ln_sigmoid};
use super::special::beta_reg;

/// Mualem's pore-connectivity (tortuosity) exponent L when none is given (Mualem 1976).
pub const DEFAULT_PORE_CONNECTIVITY: f64 = 0.5;

/// The pore model a user may ask for: Mualem's (1976) or Burdine's (1953).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ConductivityForm {
    /// Mualem (1976).
    Mualem,
    /// Burdine (1953).
    Burdine,
}

impl ConductivityForm {
    /// Every form, for messages.
    pub const ALL: [ConductivityForm; 2] = [ConductivityForm::Mualem, ConductivityForm::Burdine];

    /// The identifier used by `--conductivity` (`mualem`, `burdine`).
    pub fn id(self) -> &'static str {
        match self {
            ConductivityForm::Mualem => "mualem",
            ConductivityForm::Burdine => "burdine",
        }
    }
}

impl fmt::Display for ConductivityForm {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.id())
    }
}

impl FromStr for ConductivityForm {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        ConductivityForm::ALL
            .into_iter()
            .find(|f| f.id().eq_ignore_ascii_case(s.trim()))
            .ok_or_else(|| format!("unknown conductivity form {s:?}, expected mualem or burdine"))
    }
}

/// A conductivity model asked for that does not go with a retention model.
#[derive(Debug, Clone, Copy, PartialEq, Eq, thiserror::Error)]
pub enum ConductivityChoiceError {
    /// The retention model has no closed-form conductivity at all.
    #[error(
        "{0} has no closed-form conductivity (Mualem's integral has none with its correction term)"
    )]
    NoClosedForm(ModelKind),
    /// The retention model has a conductivity model, but not in this form.
    #[error("{model} has no {form} conductivity here; it pairs with {available}")]
    NotAvailable {
        /// The retention model.
        model: ModelKind,
        /// The form asked for.
        form: ConductivityForm,
        /// The conductivity model it has.
        available: &'static str,
    },
}

/// A relative-conductivity model paired with a retention model.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ConductivityModel {
    /// Mualem (1976) with van Genuchten (1980), m = 1 - 1/n.
    MualemVanGenuchten,
    /// Mualem (1976) with van Genuchten (1980), m free: the incomplete beta form.
    MualemVanGenuchtenFreeM,
    /// Burdine (1953) with Brooks-Corey (1964).
    BurdineBrooksCorey,
    /// Mualem (1976) with Brooks-Corey (1964).
    MualemBrooksCorey,
    /// Mualem with Kosugi (1996).
    MualemKosugi,
    /// Mualem with Durner's bimodal curve (Priesack & Durner 2006).
    MualemDurner,
    /// Campbell (1974).
    Campbell,
}

impl ConductivityModel {
    /// The conductivity model used for a retention model when none is asked for; `None` for
    /// Fredlund-Xing, which has no closed form.
    pub fn for_model(kind: ModelKind) -> Option<ConductivityModel> {
        match kind {
            ModelKind::VanGenuchten => Some(ConductivityModel::MualemVanGenuchten),
            ModelKind::VanGenuchtenFreeM => Some(ConductivityModel::MualemVanGenuchtenFreeM),
            ModelKind::BrooksCorey => Some(ConductivityModel::BurdineBrooksCorey),
            ModelKind::Kosugi => Some(ConductivityModel::MualemKosugi),
            ModelKind::Durner => Some(ConductivityModel::MualemDurner),
            ModelKind::Campbell => Some(ConductivityModel::Campbell),
            ModelKind::FredlundXing => None,
        }
    }

    /// The conductivity model for a retention model in the form asked for (`None`: the
    /// default of [`Self::for_model`]). Brooks-Corey has both forms; the van Genuchten family
    /// and Kosugi have Mualem's; Campbell has its own (neither form can be asked for).
    ///
    /// # Errors
    /// [`ConductivityChoiceError`] when the model has no closed form or not this form.
    pub fn select(
        kind: ModelKind,
        form: Option<ConductivityForm>,
    ) -> Result<ConductivityModel, ConductivityChoiceError> {
        let default = ConductivityModel::for_model(kind)
            .ok_or(ConductivityChoiceError::NoClosedForm(kind))?;
        let Some(form) = form else {
            return Ok(default);
        };
        let chosen = match (kind, form) {
            (ModelKind::BrooksCorey, ConductivityForm::Mualem) => {
                Some(ConductivityModel::MualemBrooksCorey)
            }
            (ModelKind::BrooksCorey, ConductivityForm::Burdine) => {
                Some(ConductivityModel::BurdineBrooksCorey)
            }
            (ModelKind::Campbell, _) | (_, ConductivityForm::Burdine) => None,
            (_, ConductivityForm::Mualem) => Some(default),
        };
        chosen.ok_or(ConductivityChoiceError::NotAvailable {
            model: kind,
            form,
            available: default.display_name(),
        })
    }

    /// The retention model whose parameters this conductivity model takes.
    pub fn retention(self) -> ModelKind {
        match self {
            ConductivityModel::MualemVanGenuchten => ModelKind::VanGenuchten,
            ConductivityModel::MualemVanGenuchtenFreeM => ModelKind::VanGenuchtenFreeM,
            ConductivityModel::BurdineBrooksCorey | ConductivityModel::MualemBrooksCorey => {
                ModelKind::BrooksCorey
            }
            ConductivityModel::MualemKosugi => ModelKind::Kosugi,
            ConductivityModel::MualemDurner => ModelKind::Durner,
            ConductivityModel::Campbell => ModelKind::Campbell,
        }
    }

    /// The identifier written beside conductivity values (`mualem-brooks-corey`, ...).
    pub fn id(self) -> &'static str {
        match self {
            ConductivityModel::MualemVanGenuchten => "mualem-van-genuchten",
            ConductivityModel::MualemVanGenuchtenFreeM => "mualem-van-genuchten-free-m",
            ConductivityModel::BurdineBrooksCorey => "burdine-brooks-corey",
            ConductivityModel::MualemBrooksCorey => "mualem-brooks-corey",
            ConductivityModel::MualemKosugi => "mualem-kosugi",
            ConductivityModel::MualemDurner => "mualem-durner",
            ConductivityModel::Campbell => "campbell",
        }
    }

    /// The published name, for reports.
    pub fn display_name(self) -> &'static str {
        match self {
            ConductivityModel::MualemVanGenuchten => "Mualem-van Genuchten",
            ConductivityModel::MualemVanGenuchtenFreeM => "Mualem-van Genuchten (free m)",
            ConductivityModel::BurdineBrooksCorey => "Burdine-Brooks-Corey",
            ConductivityModel::MualemBrooksCorey => "Mualem-Brooks-Corey",
            ConductivityModel::MualemKosugi => "Mualem-Kosugi",
            ConductivityModel::MualemDurner => "Mualem-Durner (Priesack & Durner 2006)",
            ConductivityModel::Campbell => "Campbell",
        }
    }

    /// Whether the pore-connectivity exponent L enters this model (the Mualem forms).
    pub fn uses_pore_connectivity(self) -> bool {
        !matches!(
            self,
            ConductivityModel::BurdineBrooksCorey | ConductivityModel::Campbell
        )
    }

    /// Relative conductivity Kr(h) in [0, 1] for the parameters of [`Self::retention`];
    /// `None` when the value is not finite.
    pub fn relative(self, h: f64, p: &[f64], pore_connectivity: f64) -> Option<f64> {
        let l = pore_connectivity;
        let kr = match self {
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
            ConductivityModel::MualemVanGenuchtenFreeM => {
                let (alpha, n, m) = (p[2], p[3], p[4]);
                match VgTerm::at(h, alpha, n, m) {
                    None => 1.0,
                    Some(t) => {
                        // z = Se^(1/m) = 1 / (1 + (alpha h)^n), 1 - z = t.sig, both exact.
                        let z = (-t.lnb).exp();
                        let i = beta_reg(m + 1.0 / n, 1.0 - 1.0 / n, z, t.sig)?;
                        (-l * m * t.lnb).exp() * i * i
                    }
                }
            }
            ConductivityModel::BurdineBrooksCorey | ConductivityModel::MualemBrooksCorey => {
                let (h_b, lambda) = (p[2], p[3]);
                // Se = (h_b/h)^lambda: Burdine Se^(3 + 2/lambda), Mualem Se^(L + 2 + 2/lambda).
                let exponent = if self == ConductivityModel::BurdineBrooksCorey {
                    2.0 + 3.0 * lambda
                } else {
                    2.0 + (l + 2.0) * lambda
                };
                if h <= h_b {
                    1.0
                } else {
                    (exponent * (h_b / h).ln()).exp()
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
}

impl fmt::Display for ConductivityModel {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.id())
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

/// Relative conductivity Kr(h) = K(h) / Ks, in [0, 1], with the retention model's default
/// conductivity model ([`ConductivityModel::for_model`]).
///
/// `pore_connectivity` is Mualem's L (used by the Mualem forms only; see the module table).
/// `None` when the model has no closed-form conductivity or the value is not finite.
pub fn relative_conductivity(
    kind: ModelKind,
    h: f64,
    p: &[f64],
    pore_connectivity: f64,
) -> Option<f64> {
    ConductivityModel::for_model(kind)?.relative(h, p, pore_connectivity)
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

/// Hydraulic conductivity K(h) = Ks Kr(h), in the unit of `ks` (cm/day in porewise's files),
/// with the retention model's default conductivity model.
///
/// `None` when the model has no closed-form conductivity or a value is not finite.
pub fn conductivity(
    kind: ModelKind,
    h: f64,
    p: &[f64],
    ks: f64,
    pore_connectivity: f64,
) -> Option<f64> {
    ConductivityModel::for_model(kind)?.conductivity(h, p, ks, pore_connectivity)
}

impl ConductivityModel {
    /// K(h) = Ks Kr(h), in the unit of `ks`; `None` when a value is not finite.
    pub fn conductivity(self, h: f64, p: &[f64], ks: f64, pore_connectivity: f64) -> Option<f64> {
        self.relative(h, p, pore_connectivity)
            .and_then(|kr| finite(ks * kr))
    }
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
    fn fredlund_xing_alone_has_no_closed_form() {
        assert_eq!(
            relative_conductivity(
                ModelKind::FredlundXing,
                10.0,
                &[0.4, 100.0, 2.0, 1.0, 15000.0],
                0.5
            ),
            None
        );
        assert_eq!(
            ConductivityModel::select(ModelKind::FredlundXing, None),
            Err(ConductivityChoiceError::NoClosedForm(
                ModelKind::FredlundXing
            ))
        );
        let free_m = relative_conductivity(
            ModelKind::VanGenuchtenFreeM,
            10.0,
            &[0.05, 0.4, 0.02, 1.5, 0.3],
            0.5,
        );
        assert!(free_m.is_some_and(|kr| kr > 0.0 && kr < 1.0), "{free_m:?}");
    }

    #[test]
    fn forms_are_offered_where_they_are_published() {
        use ConductivityForm::{Burdine, Mualem};
        let pick = |kind, form| ConductivityModel::select(kind, form);
        assert_eq!(
            pick(ModelKind::BrooksCorey, None),
            Ok(ConductivityModel::BurdineBrooksCorey)
        );
        assert_eq!(
            pick(ModelKind::BrooksCorey, Some(Mualem)),
            Ok(ConductivityModel::MualemBrooksCorey)
        );
        assert_eq!(
            pick(ModelKind::VanGenuchtenFreeM, Some(Mualem)),
            Ok(ConductivityModel::MualemVanGenuchtenFreeM)
        );
        assert!(matches!(
            pick(ModelKind::VanGenuchten, Some(Burdine)),
            Err(ConductivityChoiceError::NotAvailable { .. })
        ));
        assert!(matches!(
            pick(ModelKind::Campbell, Some(Mualem)),
            Err(ConductivityChoiceError::NotAvailable { .. })
        ));
        for kind in ModelKind::ALL {
            if let Ok(model) = pick(kind, None) {
                assert_eq!(model.retention(), kind);
            }
        }
        assert_eq!("Mualem".parse::<ConductivityForm>(), Ok(Mualem));
        assert!("brooks".parse::<ConductivityForm>().is_err());
        let json = serde_json::to_string(&ConductivityModel::MualemBrooksCorey).expect("json");
        assert_eq!(json, "\"mualem-brooks-corey\"");
    }

    #[test]
    fn mualem_brooks_corey_follows_its_exponent() {
        // Kr = Se^(L + 2 + 2/lambda) (Mualem 1976 with Brooks & Corey 1964), Se = (h_b/h)^lambda.
        let p = [0.02, 0.437, 7.26, 0.592];
        for (h, l) in [(10.0, 0.5), (1000.0, 0.5), (100.0, -1.0), (100.0, 2.0)] {
            let kr = ConductivityModel::MualemBrooksCorey
                .relative(h, &p, l)
                .expect("Kr");
            let se: f64 = (7.26_f64 / h).powf(0.592);
            let want = se.powf(l + 2.0 + 2.0 / 0.592);
            assert!(
                (kr / want - 1.0).abs() < 1e-12,
                "h {h} L {l}: {kr} vs {want}"
            );
        }
        // With L = 1 the Mualem exponent equals Burdine's 3 + 2/lambda.
        let m = ConductivityModel::MualemBrooksCorey.relative(100.0, &p, 1.0);
        let b = ConductivityModel::BurdineBrooksCorey.relative(100.0, &p, 1.0);
        assert!((m.expect("m") / b.expect("b") - 1.0).abs() < 1e-14);
        assert_eq!(
            ConductivityModel::MualemBrooksCorey.relative(5.0, &p, 0.5),
            Some(1.0)
        );
    }
}
