//! The recording model: sites with positions, and what was recorded at them.
//!
//! Units: time in seconds, positions in micrometres, in the layout's own axes.

use crate::place::Notice;
use serde::{Deserialize, Serialize};

/// A recording site: an electrode or an ROI, with its position.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Site {
    /// Identifier as written in the files.
    pub id: String,
    /// Position in micrometres, layout axes.
    pub x_um: f64,
    pub y_um: f64,
}

impl Site {
    /// Position as `[x, y]` in micrometres.
    pub fn position_um(&self) -> [f64; 2] {
        [self.x_um, self.y_um]
    }
}

/// What was recorded, aligned with [`Recording::sites`].
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "form", rename_all = "snake_case")]
pub enum Activity {
    /// Spike times per site, seconds, ascending; an empty train is a silent site.
    Spikes { trains_s: Vec<Vec<f64>> },
    /// Fluorescence per site on a common time base; NaN marks missing frames.
    Traces {
        time_s: Vec<f64>,
        frame_interval_s: f64,
        values: Vec<Vec<f64>>,
    },
}

/// One input file that went into a recording.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SourceFile {
    /// Name as given by the user.
    pub name: String,
    /// What it held: `spike_list`, `layout`, `roi_traces`.
    pub kind: String,
}

/// What is known about how the recording was made.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Metadata {
    /// Files read.
    pub sources: Vec<SourceFile>,
    /// Sampling interval of the acquisition in seconds (frame interval for imaging), when known.
    pub sample_interval_s: Option<f64>,
    /// Smallest time step the files can express, in seconds, when known.
    pub time_quantum_s: Option<f64>,
    /// Where the latest event was read (file, line, column, site), when known: messages
    /// about a recording's span point to it.
    #[serde(skip)]
    pub latest_event: Option<crate::place::Place>,
}

/// Sites, their activity and metadata. Built from importer output by
/// [`Recording::from_spike_list`] or [`Recording::from_roi_traces`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Recording {
    /// All sites of the layout, in layout order.
    pub sites: Vec<Site>,
    /// Activity, one entry per site.
    pub activity: Activity,
    /// How the recording was made.
    pub metadata: Metadata,
    /// What the user should know (from the importers and from matching the files).
    pub notices: Vec<Notice>,
    /// The stimuli given during the recording, when a protocol came with it.
    pub stimuli: Option<StimulusProtocol>,
}

impl Recording {
    /// Identifiers of sites with no spikes (spike recordings only; empty for traces).
    pub fn silent_sites(&self) -> Vec<&str> {
        match &self.activity {
            Activity::Spikes { trains_s } => self
                .sites
                .iter()
                .zip(trains_s)
                .filter(|(_, t)| t.is_empty())
                .map(|(s, _)| s.id.as_str())
                .collect(),
            Activity::Traces { .. } => Vec::new(),
        }
    }

    /// First and last time with data, seconds: the first and last spike, or the first and
    /// last frame. `None` for a recording with no spikes at all.
    pub fn observed_span_s(&self) -> Option<(f64, f64)> {
        match &self.activity {
            Activity::Spikes { trains_s } => trains_span_s(trains_s),
            Activity::Traces { time_s, .. } => Some((*time_s.first()?, *time_s.last()?)),
        }
    }
}

/// First and last spike over all trains (each ascending), seconds; `None` with no spikes.
pub fn trains_span_s(trains_s: &[Vec<f64>]) -> Option<(f64, f64)> {
    let first = trains_s
        .iter()
        .filter_map(|t| t.first())
        .copied()
        .reduce(f64::min)?;
    let last = trains_s
        .iter()
        .filter_map(|t| t.last())
        .copied()
        .reduce(f64::max)?;
    Some((first, last))
}

/// The unit of a stimulus amplitude, as its column names it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum AmplitudeUnit {
    Volt,
    Millivolt,
    VoltPerMetre,
    Microampere,
    Milliampere,
}

impl AmplitudeUnit {
    /// Reads a unit as written after `amplitude_` or inside brackets.
    pub fn parse(text: &str) -> Option<AmplitudeUnit> {
        let t = text.trim();
        Some(match t {
            "V" | "v" => AmplitudeUnit::Volt,
            "mV" | "mv" => AmplitudeUnit::Millivolt,
            _ => match t.to_lowercase().as_str() {
                "v/m" | "v_per_m" | "v per m" => AmplitudeUnit::VoltPerMetre,
                "ua" | "µa" | "μa" | "microampere" => AmplitudeUnit::Microampere,
                "ma" => AmplitudeUnit::Milliampere,
                _ => return None,
            },
        })
    }

    /// The unit as written in a column name (`amplitude_V_per_m`).
    pub fn column_suffix(self) -> &'static str {
        match self {
            AmplitudeUnit::Volt => "V",
            AmplitudeUnit::Millivolt => "mV",
            AmplitudeUnit::VoltPerMetre => "V_per_m",
            AmplitudeUnit::Microampere => "uA",
            AmplitudeUnit::Milliampere => "mA",
        }
    }

    /// The unit's symbol.
    pub fn symbol(self) -> &'static str {
        match self {
            AmplitudeUnit::Volt => "V",
            AmplitudeUnit::Millivolt => "mV",
            AmplitudeUnit::VoltPerMetre => "V/m",
            AmplitudeUnit::Microampere => "µA",
            AmplitudeUnit::Milliampere => "mA",
        }
    }
}

/// One stimulus.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Stimulus {
    /// When it was given, s.
    pub time_s: f64,
    /// Its strength, in the protocol's unit.
    pub amplitude: f64,
    /// The stimulating electrode; `None` for a field across the dish.
    pub site: Option<String>,
    pub label: Option<String>,
    /// The line of the file it was read from.
    pub line: u64,
}

/// A stimulus protocol, in time order.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StimulusProtocol {
    pub file: String,
    pub unit: AmplitudeUnit,
    pub stimuli: Vec<Stimulus>,
    pub notices: Vec<Notice>,
}
