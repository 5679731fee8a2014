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
/// A speed (mm/s) as reports show it: one decimal from 1 mm/s up, two significant digits
/// below (0.012, 0.00034), exponent form under 1e-4 (a layout in the wrong unit must not
/// print as "0.0 mm/s").
pub fn speed_text(v: f64) -> String {
    let a = v.abs();
    if a >= 0.95 || v == 0.0 || !v.is_finite() {
        format!("{v:.1}")
    } else if a >= 1e-4 {
        let decimals = (-a.log10()).ceil() as usize + 1;
        format!("{v:.decimals$}")
    } else {
        format!("{v:.1e}")
    }
}

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

#[cfg(test)]
mod speed_text_tests {
    use super::speed_text;

    /// Two significant digits below 1 mm/s, one decimal above (the text report's columns).
    #[test]
    fn small_speeds_keep_two_significant_digits() {
        assert_eq!(speed_text(21.34), "21.3");
        assert_eq!(speed_text(0.0), "0.0");
        assert_eq!(speed_text(0.5), "0.50");
        assert_eq!(speed_text(0.0123), "0.012");
        assert_eq!(speed_text(-0.00034), "-0.00034");
        assert_eq!(speed_text(3.7e-9), "3.7e-9");
    }
}
