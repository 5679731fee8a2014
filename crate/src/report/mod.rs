//! Reports: what a recording holds and what the analysis found, as plain serialisable
//! structs with units in every field name, and their text renderings for the terminal.

mod analysis;
pub mod analysis_document;
pub mod compare_figures;
pub mod document;
pub mod evidence_figures;
pub mod figures;
mod inspection;
pub mod page_text;
pub mod response_figures;
mod response_tables;
pub mod rhythm_figures;
pub mod study_document;
mod svg;
pub mod truth;
pub mod workbook;

pub use analysis::{AnalysisReport, ANALYSIS_SCHEMA};
pub use inspection::{inspect, Inspection, SiteRow, TrackSummary};

/// `electrodes.csv`: one row per channel of a voltage recording.
pub fn electrodes_csv(rows: &[crate::detect::voltage::ElectrodeRow]) -> String {
    let mut out = crate::csv_out::CsvOut::new([
        "channel",
        "site",
        "noise_uv",
        "spike_count",
        "rate_hz",
        "saturated_fraction",
        "status",
    ]);
    for r in rows {
        out.row([
            r.channel.to_string(),
            r.site.clone(),
            r.noise_uv.to_string(),
            r.spike_count.to_string(),
            r.rate_hz.to_string(),
            r.saturated_fraction.to_string(),
            r.status.to_string(),
        ]);
    }
    out.finish()
}

/// The electrode report as text, one line per electrode that is not `ok`, and a count.
pub fn electrodes_text(rows: &[crate::detect::voltage::ElectrodeRow]) -> String {
    let ok = rows
        .iter()
        .filter(|r| r.status == crate::detect::voltage::ElectrodeStatus::Ok)
        .count();
    let mut out = format!(
        "electrodes: {ok} of {} look usable (noise by MAD, spikes at the threshold)\n",
        rows.len()
    );
    for r in rows
        .iter()
        .filter(|r| r.status != crate::detect::voltage::ElectrodeStatus::Ok)
    {
        out.push_str(&format!(
            "  channel {} (site {}): {}; noise {:.2} µV, {} spikes ({:.3} Hz)\n",
            r.channel,
            r.site,
            r.status.words(),
            r.noise_uv,
            r.spike_count,
            r.rate_hz
        ));
    }
    out
}
