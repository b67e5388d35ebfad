//! Everything that can happen to the UI ([`Action`]) and everything it asks the runtime to do
//! ([`Effect`]).
//!
//! Keys map to actions through the key table; the runtime turns loads, fits and flag changes
//! into result actions. [`update`](super::update::update) consumes actions and returns
//! effects: state changes happen there and nowhere else.

use crate::analysis::FitRunSummary;

use crate::model::domain::FlagTarget;

use super::app::{
    DepthData, ReviewEpisode, ReviewItem, SampleDetail, SensorInfo, SeriesData, SeriesRequest, Tree,
};
use super::worker::{FitRequest, JobId};

/// Data the runtime loaded from the campaign file.
#[derive(Debug, Clone, PartialEq)]
pub enum Loaded {
    /// The campaign tree (outline, fit standings, flag counts).
    Tree(Tree),
    /// One sample's readings, fit and derived values.
    Sample(Box<SampleDetail>),
    /// One site's depth view.
    Depth(Box<DepthData>),
    /// The review queue, worst first, or why there is none.
    Review(Result<Vec<ReviewItem>, String>),
    /// The review queue grouped into episodes, worst first, or why there is none.
    Episodes(Result<Vec<ReviewEpisode>, String>),
    /// Every logger sensor of the campaign, or why they cannot be read.
    Sensors(Result<Vec<SensorInfo>, String>),
    /// The series of one depth in a window.
    Series(Box<SeriesData>),
}

/// What can happen: a user intent from the key table, or a result from the runtime.
#[derive(Debug, Clone, PartialEq)]
pub enum Action {
    /// Move up one row.
    Up,
    /// Move down one row.
    Down,
    /// Move up a page.
    PageUp,
    /// Move down a page.
    PageDown,
    /// First row.
    Top,
    /// Last row.
    Bottom,
    /// Collapse, go to the parent, or the previous site (depth view).
    Left,
    /// Expand, go to the first child, or the next site (depth view).
    Right,
    /// Focus the next pane.
    NextPane,
    /// Focus the previous pane.
    PrevPane,
    /// Open what is under the cursor.
    Open,
    /// Go back (close, clear the filter, leave the screen).
    Back,
    /// Show the browse screen.
    ShowBrowse,
    /// Show the depth view of the site under the cursor.
    ShowDepth,
    /// Show the review queue.
    ShowReview,
    /// Show the logger series of the site under the cursor.
    ShowSeries,
    /// The previous site with logger series.
    PrevSite,
    /// The next site with logger series.
    NextSite,
    /// Show half the time window.
    ZoomIn,
    /// Show twice the time window.
    ZoomOut,
    /// Show everything logged.
    WholeSpan,
    /// Show or hide the key help.
    ToggleHelp,
    /// Start typing the tree filter.
    StartFilter,
    /// Refit the selected sample.
    RefitSample,
    /// Refit the selected sample with its measured conductivity (a joint fit).
    RefitSampleWithConductivity,
    /// Make the selected sample's newest fit of the next kind current (retention-only, with
    /// conductivity, with the texture prior, ...), stepping round.
    NextCurrentFit,
    /// Refit every sample of the selected site.
    RefitSite,
    /// Refit every sample of the campaign.
    RefitAll,
    /// Next model for refits (the models in turn, then auto).
    CycleModel,
    /// Next suction unit (cm, kPa, pF).
    CycleUnits,
    /// Show or hide the 95 % band.
    ToggleBand,
    /// Curve pane: water content or conductivity against suction.
    ToggleConductivity,
    /// Sum the profile's available water 10 cm deeper.
    DeeperRootZone,
    /// Sum it 10 cm shallower.
    ShallowerRootZone,
    /// Fill the depth view's layers without a fitted core with their texture estimate, or
    /// go back to measured values only.
    ToggleTextureFill,
    /// Flag the selected reading, or clear its flag (asks for a reason).
    ToggleFlag,
    /// Accept the review item under the cursor (exclude the reading or record).
    Accept,
    /// Dismiss it (keep the reading).
    Dismiss,
    /// Decide every flag of a review episode in one transaction.
    DecideFlags {
        /// The flags.
        flag_ids: Vec<i64>,
        /// True to accept, false to dismiss.
        accept: bool,
    },
    /// Write the campaign report.
    Export,
    /// A typed character.
    Char(char),
    /// Delete the last typed character.
    Backspace,
    /// Finish typing / answer yes.
    Submit,
    /// Abandon typing / answer no.
    Cancel,
    /// Quit (asks first while a fit is running).
    Quit,
    /// Quit at once (Ctrl-C).
    ForceQuit,
    /// The runtime loaded something.
    Loaded(Loaded),
    /// A load failed.
    LoadFailed(String),
    /// A fit job made progress.
    FitProgress {
        /// Which job.
        job: JobId,
        /// Samples done.
        done: usize,
        /// Samples in the job.
        total: usize,
    },
    /// A fit job ended.
    FitFinished {
        /// Which job.
        job: JobId,
        /// What it did, or why it could not run.
        result: Result<FitRunSummary, String>,
    },
    /// A flag was changed (the message says what), or could not be.
    FlagChanged(Result<String, String>),
    /// Another fit of a sample was made current (the message says which), or could not be.
    CurrentChanged(Result<String, String>),
    /// The export ended (the message names the file), or could not run.
    ExportFinished(Result<String, String>),
    /// Time passed (drives the busy spinner).
    Tick,
    /// The terminal changed size (columns, rows).
    Resize(u16, u16),
}

/// What [`update`](super::update::update) asks the runtime to do.
#[derive(Debug, Clone, PartialEq)]
pub enum Effect {
    /// Reload the tree.
    LoadTree,
    /// Load one sample (database id).
    LoadSample(i64),
    /// Load a site's depth view.
    LoadDepth {
        /// Site code.
        site: String,
        /// Root-zone depth, cm.
        root_zone_cm: f64,
    },
    /// Load the review queue.
    LoadReview,
    /// Load the list of logger sensors.
    LoadSensors,
    /// Load a depth's logger series in a window.
    LoadSeries(SeriesRequest),
    /// Start a fit job on the worker.
    StartFit {
        /// Its id.
        job: JobId,
        /// What to fit.
        request: FitRequest,
    },
    /// Flag a reading (or a conductivity reading) by hand, excluding it from fits.
    SetFlag {
        /// The reading or conductivity reading.
        target: FlagTarget,
        /// Why.
        reason: String,
    },
    /// Clear the live flag of a reading (it is used by fits again).
    ClearFlag {
        /// The reading or conductivity reading.
        target: FlagTarget,
        /// The reviewer's note (may be empty).
        note: String,
    },
    /// Decide a suggested flag.
    DecideFlag {
        /// The flag.
        flag_id: i64,
        /// What it is on (for the message).
        target: FlagTarget,
        /// True to accept (exclude the reading), false to dismiss.
        accept: bool,
    },
    /// Decide every flag of a review episode in one transaction.
    DecideFlags {
        /// The flags.
        flag_ids: Vec<i64>,
        /// True to accept, false to dismiss.
        accept: bool,
    },
    /// Make the sample's newest fit of its next kind current.
    NextCurrentFit {
        /// The sample (database id).
        sample_id: i64,
        /// Its code, for the message.
        code: String,
    },
    /// Write the campaign report.
    Export,
    /// Leave the UI.
    Quit,
}
