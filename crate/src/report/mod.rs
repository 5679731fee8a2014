//! Reports: what a recording holds and what the analysis found, as plain serialisable
//! structs with units in every field name, and their text renderings for the terminal.

mod inspection;

pub use inspection::{inspect, Inspection, SiteRow, TrackSummary};
