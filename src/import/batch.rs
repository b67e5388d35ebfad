//! A validated batch: the domain values read from the files of one import command, each
//! with the file and line it came from, ready for the store.

use std::fmt;

use chrono::NaiveDate;

use crate::model::domain::{Branch, Layer, Method, Sample, Site};
use crate::model::units::{SuctionUnit, WaterUnit};

/// What kind of file an import reads.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum ImportKind {
    /// Sites file: `site,name,latitude,longitude[,elevation_m,notes]`.
    Sites,
    /// Layers file: `site,top_cm,bottom_cm[,horizon,sand_pct,silt_pct,clay_pct,...]`.
    Layers,
    /// Lab retention file: `site,top_cm,bottom_cm,sample,method,suction_<unit>,theta[,...]`.
    Lab,
    /// Measured conductivity file: `site,top_cm,bottom_cm,sample,method,suction_<unit>|theta,
    /// conductivity_<unit>[,ks_<unit>,...]`.
    Conductivity,
}

impl ImportKind {
    /// The word recorded in `import_batch.kind`.
    pub fn as_str(self) -> &'static str {
        match self {
            ImportKind::Sites => "sites",
            ImportKind::Layers => "layers",
            ImportKind::Lab => "lab",
            ImportKind::Conductivity => "conductivity",
        }
    }
}

impl fmt::Display for ImportKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// Where a value came from: the index of its file in the command and its physical line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Origin {
    /// Index into [`ImportBatch::files`].
    pub file: usize,
    /// Physical line, the header being line 1.
    pub line: u64,
}

/// A value and where it came from.
#[derive(Debug, Clone, PartialEq)]
pub struct Located<T> {
    /// File and line.
    pub origin: Origin,
    /// The value.
    pub value: T,
}

/// One input file of the command.
#[derive(Debug, Clone, PartialEq)]
pub struct SourceFile {
    /// The file as the user named it.
    pub name: String,
    /// SHA-256 of its bytes, lower-case hex.
    pub sha256: String,
    /// Data rows read (good or bad).
    pub rows: u64,
    /// Lab files: the suction column's name and unit.
    pub suction: Option<(String, SuctionUnit)>,
    /// Lab files: the water-content column's name and unit.
    pub water: Option<(String, WaterUnit)>,
    /// A workbook's sheet: where its table sits, so problems name cells (`Plates!D14`).
    pub sheet: Option<super::workbook::SheetPlace>,
}

impl SourceFile {
    /// A file about to be read.
    pub fn new(name: impl Into<String>, sha256: impl Into<String>) -> Self {
        Self {
            name: name.into(),
            sha256: sha256.into(),
            rows: 0,
            suction: None,
            water: None,
            sheet: None,
        }
    }

    /// The name recorded with the import: the file, and for a workbook the sheet read
    /// (`lab.xlsx:Plates`).
    pub fn recorded_name(&self) -> String {
        match &self.sheet {
            Some(place) => format!("{}:{}", self.name, place.sheet),
            None => self.name.clone(),
        }
    }
}

/// A sample as a file describes it, and where its bulk density was given.
#[derive(Debug, Clone, PartialEq)]
pub struct SampleDraft {
    /// The sample (bulk density from the first row that gives one).
    pub sample: Sample,
    /// The row that gave the bulk density.
    pub bulk_density_origin: Option<Origin>,
}

/// Water content as read: a volumetric fraction, or gravimetric (g/g) still to be turned
/// into one with the sample's or layer's bulk density.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Water {
    /// m3/m3.
    Theta(f64),
    /// g water per g dry soil.
    Gravimetric(f64),
}

/// A reading as read from a lab file, before its water content is resolved.
#[derive(Debug, Clone, PartialEq)]
pub struct ReadingDraft {
    /// Sample code.
    pub sample: String,
    /// Suction head, cm.
    pub h_cm: f64,
    /// Water content as read.
    pub water: Water,
    /// Measuring method.
    pub method: Option<Method>,
    /// Day measured.
    pub measured_on: Option<NaiveDate>,
    /// Hysteresis branch.
    pub branch: Branch,
    /// Fit weight.
    pub weight: Option<f64>,
    /// Free text.
    pub notes: Option<String>,
}

/// Everything the files of one import command hold, validated row by row.
///
/// Sites, layers and samples appear once each (first sighting); a lab file lists the sites,
/// layers and samples its rows name, with only what the rows say filled in. Checks that need
/// the campaign file (a sample already under another layer, a suction already stored) are made
/// when the batch is applied.
#[derive(Debug, Clone, PartialEq)]
pub struct ImportBatch {
    /// The kind of every file.
    pub kind: ImportKind,
    /// The files, in command-line order.
    pub files: Vec<SourceFile>,
    /// Sites named.
    pub sites: Vec<Located<Site>>,
    /// Layers named.
    pub layers: Vec<Located<Layer>>,
    /// Samples named.
    pub samples: Vec<Located<SampleDraft>>,
    /// Readings.
    pub readings: Vec<Located<ReadingDraft>>,
    /// Measured conductivity readings and Ks values (conductivity files).
    pub conductivity: super::conductivity::ConductivityBatch,
}

impl ImportBatch {
    /// An empty batch of this kind.
    pub fn new(kind: ImportKind) -> Self {
        Self {
            kind,
            files: Vec::new(),
            sites: Vec::new(),
            layers: Vec::new(),
            samples: Vec::new(),
            readings: Vec::new(),
            conductivity: super::conductivity::ConductivityBatch::default(),
        }
    }

    /// `FILE:LINE` of an origin, for messages that point at another row.
    pub fn place(&self, origin: Origin) -> String {
        let Some(file) = self.files.get(origin.file) else {
            return format!("?:{}", origin.line);
        };
        match &file.sheet {
            Some(place) => format!("{}:{}", file.name, place.cell(origin.line, "-")),
            None => format!("{}:{}", file.name, origin.line),
        }
    }

    /// Point every problem in a workbook at its cell (`lab.xlsx:Plates!D14`) instead of
    /// `LINE:COLUMN`.
    pub fn relocate(&self, diags: &mut super::Diagnostics) {
        diags.relocate(|d| {
            if d.cell.is_some() {
                return;
            }
            if let Some(place) = self
                .files
                .iter()
                .find(|f| f.name == d.file)
                .and_then(|f| f.sheet.as_ref())
            {
                d.cell = Some(place.cell(d.line, &d.column));
            }
        });
    }

    /// The name of the file an origin points into.
    pub fn file_name(&self, origin: Origin) -> &str {
        self.files.get(origin.file).map_or("?", |f| f.name.as_str())
    }
}
