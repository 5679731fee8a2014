//! Writers for the project's own text formats: the exact inverse of the readers, so that the
//! simulator and the exports write what the importers read back unchanged.
//!
//! Numbers are written in Rust's shortest round-trip form, so reading back gives the same
//! `f64` bit for bit.

use super::spikes::SiteSpikes;
use super::table::TimeUnit;
use super::traces::RoiSeries;
use crate::csv_out::CsvOut;
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
    let mut out = CsvOut::new(["site".to_string(), format!("time_{}", unit.symbol())]);
    let scale = 1.0 / unit.seconds();
    let mut time = String::new();
    for (t, site) in rows {
        let value = if unit == TimeUnit::Seconds {
            t
        } else {
            t * scale
        };
        time.clear();
        let _ = match decimals {
            Some(d) => write!(time, "{value:.d$}"),
            None => write!(time, "{value}"),
        };
        out.row([site, time.as_str()]);
    }
    out.finish()
}

/// Writes a layout as CSV with the header `site,x_um,y_um`.
pub fn write_layout(sites: &[Site]) -> String {
    let mut out = CsvOut::new(["site", "x_um", "y_um"]);
    for s in sites {
        out.row([s.id.clone(), s.x_um.to_string(), s.y_um.to_string()]);
    }
    out.finish()
}

/// Writes ROI traces as CSV with a `time_s` column and one column per ROI; NaN is written
/// as an empty cell.
pub fn write_roi_traces(time_s: &[f64], rois: &[RoiSeries]) -> String {
    let mut out = CsvOut::new(std::iter::once("time_s").chain(rois.iter().map(|r| r.roi.as_str())));
    let mut row: Vec<String> = Vec::with_capacity(rois.len() + 1);
    for (i, t) in time_s.iter().enumerate() {
        row.clear();
        row.push(t.to_string());
        for r in rois {
            row.push(
                r.values
                    .get(i)
                    .filter(|v| !v.is_nan())
                    .map_or(String::new(), |v| v.to_string()),
            );
        }
        out.row(&row);
    }
    out.finish()
}
