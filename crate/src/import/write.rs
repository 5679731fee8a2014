//! Writers for the project's own text formats: the exact inverse of the readers, so that the
//! simulator and the exports write what the importers read back unchanged.
//!
//! Numbers are written in Rust's shortest round-trip form, so reading back gives the same
//! `f64` bit for bit.

use super::spikes::SiteSpikes;
use super::table::TimeUnit;
use super::traces::RoiSeries;
use crate::recording::Site;
use std::fmt::Write;

/// Writes a spike list as CSV with the header `site,time_s`, spikes ordered by time, each
/// time in the shortest form that reads back to the same `f64`.
pub fn write_spike_list(sites: &[SiteSpikes]) -> String {
    write_spike_list_as(sites, TimeUnit::Seconds, None)
}

/// Writes a spike list with times in `unit` (header `site,time_ms` and so on), with a fixed
/// number of decimals when `decimals` is given (which then sets the file's time quantum).
pub fn write_spike_list_as(
    sites: &[SiteSpikes],
    unit: TimeUnit,
    decimals: Option<usize>,
) -> String {
    let mut rows: Vec<(f64, &str)> = sites
        .iter()
        .flat_map(|s| s.times_s.iter().map(move |&t| (t, s.site.as_str())))
        .collect();
    rows.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut out = String::with_capacity(rows.len() * 16 + 16);
    let _ = writeln!(out, "site,time_{}", unit.symbol());
    let scale = 1.0 / unit.seconds();
    for (t, site) in rows {
        let value = if unit == TimeUnit::Seconds {
            t
        } else {
            t * scale
        };
        let _ = match decimals {
            Some(d) => writeln!(out, "{},{:.d$}", field(site), value),
            None => writeln!(out, "{},{}", field(site), value),
        };
    }
    out
}

/// Writes a layout as CSV with the header `site,x_um,y_um`.
pub fn write_layout(sites: &[Site]) -> String {
    let mut out = String::from("site,x_um,y_um\n");
    for s in sites {
        let _ = writeln!(out, "{},{},{}", field(&s.id), s.x_um, s.y_um);
    }
    out
}

/// Writes ROI traces as CSV with a `time_s` column and one column per ROI; NaN is written
/// as an empty cell.
pub fn write_roi_traces(time_s: &[f64], rois: &[RoiSeries]) -> String {
    let mut out = String::from("time_s");
    for r in rois {
        out.push(',');
        out.push_str(&field(&r.roi));
    }
    out.push('\n');
    for (i, t) in time_s.iter().enumerate() {
        let _ = write!(out, "{t}");
        for r in rois {
            out.push(',');
            if let Some(v) = r.values.get(i).filter(|v| !v.is_nan()) {
                let _ = write!(out, "{v}");
            }
        }
        out.push('\n');
    }
    out
}

/// Quotes a text field when the readers would otherwise misread it: a delimiter, a quote,
/// a line break, or a leading `#` (which would start a comment line).
fn field(text: &str) -> String {
    let needs_quotes = text.starts_with('#')
        || text
            .chars()
            .any(|c| matches!(c, ',' | '\t' | ';' | '"' | '\n' | '\r'));
    if needs_quotes {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}
