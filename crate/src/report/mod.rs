//! Reports: what a recording holds and what the analysis found, as plain serialisable
//! structs with units in every field name, and their text renderings for the terminal.

mod analysis;
pub mod figures;
mod inspection;
mod svg;
pub mod workbook;

pub use analysis::{AnalysisReport, ANALYSIS_SCHEMA};
pub use inspection::{inspect, Inspection, SiteRow, TrackSummary};
