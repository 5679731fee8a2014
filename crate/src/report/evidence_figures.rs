//! The evidence behind the event times: band-passed voltage around a site's detected spikes
//! with the detection threshold, and a ROI's dF/F with its event thresholds and onsets.

use super::figures::{chart, empty, Figure, FigureError, Size, BLUE, GREY, VERMILLION};
use super::svg::LegendMark;

/// Every snippet in grey, their mean in blue, and the detection threshold(s) (µV) dashed.
pub fn voltage_snippets(
    site: &str,
    snippets: &crate::detect::voltage::Snippets,
    thresholds_uv: &[f64],
    size: Size,
) -> Result<Figure, FigureError> {
    let n = snippets.traces_uv.len();
    if n == 0 {
        return Err(empty("no detected spike of this site in the window shown"));
    }
    let t = &snippets.offsets_ms;
    let mean: Vec<f64> = (0..t.len())
        .map(|k| snippets.traces_uv.iter().map(|s| s[k]).sum::<f64>() / n as f64)
        .collect();
    let values = snippets
        .traces_uv
        .iter()
        .flatten()
        .chain(thresholds_uv)
        .copied();
    let (lo, hi) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
        (a.min(v), b.max(v))
    });
    let pad = 0.08 * (hi - lo).max(1.0);
    let (t0, t1) = (t[0], t[t.len() - 1]);
    chart(
        size,
        &format!("Voltage around {n} detected spikes of site {site} (band-passed)"),
        (t0, t1, "time from the spike (ms)"),
        (lo - pad, hi + pad, "voltage (µV)"),
        |c| {
            for s in &snippets.traces_uv {
                let line: Vec<(f64, f64)> = t.iter().copied().zip(s.iter().copied()).collect();
                c.polyline(&line, GREY, 0.7);
            }
            let line: Vec<(f64, f64)> = t.iter().copied().zip(mean.iter().copied()).collect();
            c.polyline(&line, BLUE, 2.0);
            for &v in thresholds_uv {
                c.dashed((t0, v), (t1, v), VERMILLION, 1.5);
            }
            c.legend(&[
                ("each spike", GREY, LegendMark::Line),
                ("mean", BLUE, LegendMark::Line),
                ("detection threshold", VERMILLION, LegendMark::Dashed),
            ]);
            Ok(Vec::new())
        },
    )
}

/// One ROI's dF/F between `from_s` and `to_s` with the event thresholds and the onsets found.
pub fn fluorescence_trace(
    site: &str,
    time_s: &[f64],
    dff: &[f64],
    levels: Option<crate::detect::calcium::EventLevels>,
    onsets_s: &[f64],
    [from_s, to_s]: [f64; 2],
    size: Size,
) -> Result<Figure, FigureError> {
    let line: Vec<(f64, f64)> = time_s
        .iter()
        .zip(dff)
        .filter(|(t, v)| **t >= from_s && **t <= to_s && v.is_finite())
        .map(|(&t, &v)| (t, v))
        .collect();
    if line.len() < 2 {
        return Err(empty("no frames of this ROI in the window shown"));
    }
    let level_values = levels.iter().flat_map(|l| [l.low, l.high]);
    let (lo, hi) = line
        .iter()
        .map(|p| p.1)
        .chain(level_values)
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(v), b.max(v))
        });
    let pad = 0.08 * (hi - lo).max(1e-3);
    let onsets: Vec<f64> = onsets_s
        .iter()
        .copied()
        .filter(|t| *t >= from_s && *t <= to_s)
        .collect();
    chart(
        size,
        &format!(
            "dF/F of ROI {site} with its {} event onsets, {from_s:.1}-{to_s:.1} s",
            onsets.len()
        ),
        (from_s, to_s, "time (s)"),
        (lo - pad, hi + pad, "dF/F"),
        |c| {
            c.polyline(&line, BLUE, 1.2);
            let mut legend = vec![("dF/F", BLUE, LegendMark::Line)];
            if let Some(l) = levels {
                c.dashed((from_s, l.high), (to_s, l.high), VERMILLION, 1.2);
                c.dashed((from_s, l.low), (to_s, l.low), GREY, 1.2);
                legend.push(("event must reach", VERMILLION, LegendMark::Dashed));
                legend.push(("event lasts while above", GREY, LegendMark::Dashed));
            }
            for &t in &onsets {
                c.segment((t, lo - pad), (t, hi + pad), VERMILLION, 1.0);
            }
            if !onsets.is_empty() {
                legend.push(("event onset", VERMILLION, LegendMark::Line));
            }
            c.legend(&legend);
            Ok(onsets
                .iter()
                .map(|&t| (t, hi, format!("ROI {site}: event onset at {t:.3} s")))
                .collect())
        },
    )
}
