//! Reports: what a recording holds and what the analysis found, as plain serialisable
//! structs with units in every field name, and their text renderings for the terminal.

mod analysis;
pub mod figures;
mod inspection;
mod svg;
pub mod truth;
pub mod workbook;

pub use analysis::{AnalysisReport, ANALYSIS_SCHEMA};
pub use inspection::{inspect, Inspection, SiteRow, TrackSummary};

/// `electrodes.csv`: one row per channel of a voltage recording.
pub fn electrodes_csv(rows: &[crate::detect::voltage::ElectrodeRow]) -> String {
    let mut out =
        String::from("channel,site,noise_uv,spike_count,rate_hz,saturated_fraction,status\n");
    for r in rows {
        out.push_str(&format!(
            "{},{},{},{},{},{},{}\n",
            r.channel,
            analysis::csv_text(&r.site),
            r.noise_uv,
            r.spike_count,
            r.rate_hz,
            r.saturated_fraction,
            r.status
        ));
    }
    out
}

/// The electrode report as text, one line per electrode that is not `ok`, and a count.
pub fn electrodes_text(rows: &[crate::detect::voltage::ElectrodeRow]) -> String {
    let ok = rows.iter().filter(|r| r.status == "ok").count();
    let mut out = format!(
        "electrodes: {ok} of {} look usable (noise by MAD, spikes at the threshold)\n",
        rows.len()
    );
    for r in rows.iter().filter(|r| r.status != "ok") {
        out.push_str(&format!(
            "  channel {} (site {}): {}; noise {:.2} µV, {} spikes ({:.3} Hz)\n",
            r.channel,
            r.site,
            r.status.replace('_', " "),
            r.noise_uv,
            r.spike_count,
            r.rate_hz
        ));
    }
    out
}
