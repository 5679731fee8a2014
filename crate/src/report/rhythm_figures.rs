//! Figures of the rhythm and synchrony step: the population rate's spectrum against the
//! Poisson floor, the sites' own frequencies beside the network's, the STTC matrix in track
//! order, and lag against distance. Each takes plain series.

use super::figures::{
    chart, empty, padded, Figure, FigureError, Size, BLUE, GREEN, GREY, ORANGE, SKY_BLUE,
    VERMILLION,
};
use super::svg::{Colour, LegendMark, Plot};

/// The population rate's Welch density on a log scale, with the Poisson floor, the level a
/// peak must clear to be a rhythm, and the dominant peak.
pub fn rate_spectrum(
    density: &[(f64, f64)],
    poisson_floor: f64,
    rhythm_threshold: Option<f64>,
    peak_hz: Option<f64>,
    size: Size,
) -> Result<Figure, FigureError> {
    // Log10 of the density; the DC bin and empty bins have no logarithm.
    let points: Vec<(f64, f64)> = density
        .iter()
        .filter(|(f, p)| *f > 0.0 && *p > 0.0)
        .map(|&(f, p)| (f, p.log10()))
        .collect();
    if points.is_empty() {
        return Err(empty("no spectrum"));
    }
    let floor = (poisson_floor > 0.0).then(|| poisson_floor.log10());
    let needed = rhythm_threshold
        .filter(|t| *t > 0.0 && t.is_finite())
        .and_then(|t| floor.map(|f| f + t.log10()));
    let x1 = points.iter().map(|p| p.0).fold(0.0, f64::max);
    let (y0, y1) = padded(points.iter().map(|p| p.1).chain(floor).chain(needed))
        .ok_or_else(|| empty("no densities"))?;
    chart(
        size,
        "Spectrum of the population rate",
        (0.0, x1, "frequency (Hz)"),
        (y0, y1, "density, log10 of (events/s)²/Hz"),
        |c| {
            c.polyline(&points, BLUE, 1.5);
            let mut legend = vec![("Welch density", BLUE, LegendMark::Line)];
            if let Some(f) = floor {
                c.dashed((0.0, f), (x1, f), GREY, 1.5);
                legend.push(("Poisson floor, 2 x mean rate", GREY, LegendMark::Dashed));
            }
            if let Some(n) = needed {
                c.dashed((0.0, n), (x1, n), ORANGE, 1.5);
                legend.push(("level a rhythm must clear", ORANGE, LegendMark::Dashed));
            }
            let mut marks = Vec::new();
            if let Some(f) = peak_hz {
                if let Some(&(pf, pd)) = points
                    .iter()
                    .min_by(|a, b| (a.0 - f).abs().total_cmp(&(b.0 - f).abs()))
                {
                    c.circle(pf, pd, 4.5, VERMILLION, true);
                    legend.push(("dominant peak", VERMILLION, LegendMark::Dot));
                    marks.push((pf, pd, format!("peak at {pf:.3} Hz")));
                }
            }
            c.legend(&legend);
            Ok(marks)
        },
    )
}

/// One site's firing, for [`site_frequencies`].
#[derive(Debug, Clone, PartialEq)]
pub struct SiteFrequency {
    pub site: String,
    /// Place along the x axis: track coordinate (µm) or rank.
    pub position: f64,
    /// Events per second over the recording.
    pub rate_hz: f64,
    /// 1 / median interval outside bursts, for a site that fires regularly on its own.
    pub frequency_alone_hz: Option<f64>,
}

/// Each site's rate, and for the sites that fire regularly on their own their frequency
/// outside the network bursts, against their place; with the regular sites' mean and its
/// 95% interval, and the network's burst frequency.
pub fn site_frequencies(
    sites: &[SiteFrequency],
    position_label: &str,
    mean_hz: Option<f64>,
    mean_ci95_hz: Option<[f64; 2]>,
    network_hz: Option<f64>,
    size: Size,
) -> Result<Figure, FigureError> {
    if sites.is_empty() {
        return Err(empty("no sites"));
    }
    let (x0, x1) = padded(sites.iter().map(|s| s.position)).ok_or_else(|| empty("no sites"))?;
    let values = sites
        .iter()
        .flat_map(|s| [Some(s.rate_hz), s.frequency_alone_hz])
        .flatten()
        .chain(mean_hz)
        .chain(mean_ci95_hz.into_iter().flatten())
        .chain(network_hz)
        .chain([0.0]);
    let (_, y1) = padded(values).ok_or_else(|| empty("no frequencies"))?;
    chart(
        size,
        "Sites on their own and the network",
        (x0, x1, position_label),
        // Room above the points for the legend.
        (0.0, 1.45 * y1, "frequency (Hz)"),
        |c| {
            let mut legend = Vec::new();
            if let Some([lo, hi]) = mean_ci95_hz {
                c.rect((x0, lo), (x1, hi), SKY_BLUE, 0.35);
                legend.push(("95% interval of the mean", SKY_BLUE, LegendMark::Band));
            }
            if let Some(m) = mean_hz {
                c.segment((x0, m), (x1, m), BLUE, 1.5);
                legend.push(("mean of the regular sites", BLUE, LegendMark::Line));
            }
            if let Some(n) = network_hz {
                c.dashed((x0, n), (x1, n), VERMILLION, 2.0);
                legend.push((
                    "network bursts (1 / median interval)",
                    VERMILLION,
                    LegendMark::Dashed,
                ));
            }
            for s in sites {
                c.circle(s.position, s.rate_hz, 3.0, GREY, false);
            }
            legend.push(("site's mean rate", GREY, LegendMark::Ring));
            let regular: Vec<&SiteFrequency> = sites
                .iter()
                .filter(|s| s.frequency_alone_hz.is_some())
                .collect();
            for s in &regular {
                c.circle(
                    s.position,
                    s.frequency_alone_hz.unwrap_or(0.0),
                    4.0,
                    GREEN,
                    true,
                );
            }
            if !regular.is_empty() {
                legend.push(("regular alone: 1 / median interval", GREEN, LegendMark::Dot));
            }
            c.legend(&legend);
            Ok(sites
                .iter()
                .map(|s| {
                    let (y, label) = match s.frequency_alone_hz {
                        Some(f) => (
                            f,
                            format!("{}: {f:.3} Hz alone, {:.3} Hz mean rate", s.site, s.rate_hz),
                        ),
                        None => (
                            s.rate_hz,
                            format!(
                                "{}: {:.3} Hz mean rate, not regular alone",
                                s.site, s.rate_hz
                            ),
                        ),
                    };
                    (s.position, y, label)
                })
                .collect())
        },
    )
}

/// Largest number of cells drawn along each side of the STTC matrix: bigger matrices are
/// shown as blocks (the mean of their defined values), and the title says so.
pub const MAX_MATRIX_CELLS: usize = 96;

/// Diverging colour for a value in [-1, 1]: blue through white to vermillion.
pub fn diverging(v: f64) -> Colour {
    let t = v.clamp(-1.0, 1.0);
    let (end, f) = if t < 0.0 { (BLUE, -t) } else { (VERMILLION, t) };
    let mix = |a: u8| (255.0 + (f64::from(a) - 255.0) * f).round() as u8;
    Colour(mix(end.0), mix(end.1), mix(end.2))
}

/// The STTC of every pair as a heat map, sites in track order on both axes (`values` is
/// row-major, n x n, `None` where undefined), with a colour bar from -1 to 1.
pub fn sttc_matrix(
    sites: &[String],
    values: &[Option<f64>],
    size: Size,
) -> Result<Figure, FigureError> {
    let n = sites.len();
    if n < 2 || values.len() != n * n {
        return Err(empty("fewer than two sites with events, or no STTC"));
    }
    let block = n.div_ceil(MAX_MATRIX_CELLS);
    let cells = n.div_ceil(block);
    let title = if block > 1 {
        format!("STTC of every pair (blocks of {block} sites)")
    } else {
        "STTC of every pair".to_string()
    };
    let mut plot = Plot::with_right_margin(
        size.width_px,
        size.height_px,
        &title,
        (
            0.0,
            cells as f64,
            "site rank along the track (0 at its start)",
        ),
        (
            0.0,
            cells as f64,
            "site rank along the track (0 at its start)",
        ),
        80.0,
    );
    for bi in 0..cells {
        for bj in 0..cells {
            let (mut sum, mut count) = (0.0, 0usize);
            for i in bi * block..((bi + 1) * block).min(n) {
                for j in bj * block..((bj + 1) * block).min(n) {
                    if let Some(v) = values[i * n + j] {
                        sum += v;
                        count += 1;
                    }
                }
            }
            let colour = if count == 0 {
                GREY
            } else {
                diverging(sum / count as f64)
            };
            plot.rect(
                (bj as f64, bi as f64),
                (bj as f64 + 1.0, bi as f64 + 1.0),
                colour,
                1.0,
            );
        }
    }
    plot.colour_bar(-1.0, 1.0, "STTC (no unit; grey: undefined)", diverging);
    let mut points = Vec::new();
    if block == 1 {
        for i in 0..n {
            for j in 0..n {
                let (px, py) = plot.at(j as f64 + 0.5, i as f64 + 0.5);
                points.push(super::figures::ReadoutPoint {
                    x_px: px,
                    y_px: py,
                    label: match values[i * n + j] {
                        Some(v) => format!("{} with {}: STTC {v:.3}", sites[i], sites[j]),
                        None => format!("{} with {}: undefined", sites[i], sites[j]),
                    },
                });
            }
        }
    }
    Ok(Figure {
        x_axis: Some(plot.x_span()),
        svg: plot.finish(),
        width_px: size.width_px,
        height_px: size.height_px,
        points,
    })
}

/// One pair's lag, for [`lag_distance`].
#[derive(Debug, Clone, PartialEq)]
pub struct PairLag {
    pub site_a: String,
    pub site_b: String,
    pub distance_um: f64,
    /// Lag along the direction of travel, ms.
    pub lag_ms: f64,
}

/// Each pair's lag against its distance along the track, with the line of the implied
/// speed (lag = distance / speed) and of its 95% interval.
pub fn lag_distance(
    pairs: &[PairLag],
    speed_mm_s: Option<f64>,
    speed_ci95_mm_s: Option<[Option<f64>; 2]>,
    size: Size,
) -> Result<Figure, FigureError> {
    if pairs.is_empty() {
        return Err(empty(
            "no pair of sites has a lag (too few network bursts, or no track)",
        ));
    }
    let x1 = pairs.iter().map(|p| p.distance_um).fold(0.0, f64::max) * 1.05;
    let (y0, y1) =
        padded(pairs.iter().map(|p| p.lag_ms).chain([0.0])).ok_or_else(|| empty("no lags"))?;
    // µm / (mm/s) = ms.
    let line = |v: f64| ((0.0, 0.0), (x1, x1 / v));
    chart(
        size,
        "Lag between sites against their distance",
        (0.0, x1, "distance along the track (µm)"),
        (y0, y1, "lag along the direction of travel (ms)"),
        |c| {
            let mut legend = vec![("pair of sites (median over bursts)", BLUE, LegendMark::Dot)];
            for p in pairs {
                c.circle(p.distance_um, p.lag_ms, 3.0, BLUE, true);
            }
            if let Some(v) = speed_mm_s.filter(|v| *v > 0.0) {
                let (a, b) = line(v);
                c.segment(a, b, VERMILLION, 2.0);
                legend.push(("implied speed", VERMILLION, LegendMark::Line));
                for bound in speed_ci95_mm_s.into_iter().flatten().flatten() {
                    let (a, b) = line(bound);
                    c.dashed(a, b, VERMILLION, 1.0);
                }
                if speed_ci95_mm_s.is_some() {
                    legend.push(("its 95% interval", VERMILLION, LegendMark::Dashed));
                }
            }
            // Lags rise with distance: the top-left corner is empty.
            c.legend_in(&legend, true);
            Ok(pairs
                .iter()
                .map(|p| {
                    (
                        p.distance_um,
                        p.lag_ms,
                        format!(
                            "{} to {}: {:.0} µm, {:.2} ms",
                            p.site_a, p.site_b, p.distance_um, p.lag_ms
                        ),
                    )
                })
                .collect())
        },
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_diverging_scale_runs_blue_white_vermillion() {
        assert_eq!(diverging(-1.0), BLUE);
        assert_eq!(diverging(0.0), Colour(255, 255, 255));
        assert_eq!(diverging(1.0), VERMILLION);
        assert_eq!(diverging(7.0), VERMILLION);
    }

    #[test]
    fn big_matrices_are_drawn_in_blocks() {
        let n = 200;
        let sites: Vec<String> = (0..n).map(|k| format!("s{k}")).collect();
        let values: Vec<Option<f64>> = (0..n * n).map(|k| Some((k % 7) as f64 / 7.0)).collect();
        let f = sttc_matrix(&sites, &values, Size::default()).unwrap();
        assert!(f.svg.contains("blocks of 3 sites"));
        // 67 x 67 cells plus the colour bar's 64 steps and the frame.
        assert!(f.svg.matches("<rect").count() < 67 * 67 + 100);
    }
}
