//! Campaign-wide work built from the store and the fit engine: fitting samples and recording
//! the attempts, the outlier review, and the derived numbers (available water per fit, layer
//! and profile).

pub mod advise;
pub mod current;
pub mod episodes;
pub mod fitting;
pub mod joint;
pub mod review;
pub mod texture;
pub mod water;

pub use current::{SampleFit, sample_fits, sample_fits_with};
pub use fitting::{
    FitAttempt, FitRunSummary, ModelChoice, fit_campaign, fit_campaign_with, fit_choice, fit_input,
};
pub use water::{
    BetweenCores, DerivedIntervals, FitDerived, LayerWater, SiteProfile, SumInterval,
    between_cores, derive_fit, fit_available_water, profiles, profiles_pooled,
};
