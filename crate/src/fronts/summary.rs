//! Recording-level results: rhythm, speed statistics, direction balance, initiation sites,
//! propagation reliability.

use super::{AnalysisSettings, BurstResult, NoFrontKind};
use super::{FrontModel, LineTravel, RingTravel};
use crate::fronts::regression::theil_sen;
use crate::geometry::{Track, TrackFit};
use crate::recording::Recording;
use crate::rhythm::{interval_stats, IntervalStats};
use crate::stats::{median_interval, quantile, wilson_interval};
use serde::Serialize;

/// Change of speed over the recording (Theil-Sen of speed on burst time).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Drift {
    pub slope_mm_s_per_min: f64,
    /// Sen's interval.
    pub ci95_mm_s_per_min: Option<[f64; 2]>,
}

/// Which way fronts go.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DirectionBalance {
    /// `line` (increasing / decreasing coordinate), `ring` (ccw / cw) or `plane`.
    pub kind: String,
    pub first_label: Option<String>,
    pub second_label: Option<String>,
    pub first_count: usize,
    pub second_count: usize,
    /// Two-way fronts (counted apart).
    pub two_way_count: usize,
    /// first / (first + second), with its Wilson 95% interval.
    pub first_fraction: Option<f64>,
    pub first_fraction_ci95: Option<[f64; 2]>,
    /// Plane: direction of the mean unit vector of travel, degrees counter-clockwise from +x.
    pub mean_direction_deg: Option<f64>,
    /// Plane: length of the mean unit vector (1 = all fronts the same way, 0 = no preference).
    pub mean_resultant_length: Option<f64>,
}

/// How often a site is a front's origin.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InitiationCount {
    pub site: String,
    pub along_um: Option<f64>,
    pub count: usize,
    pub fraction: f64,
}

/// Origins per zone of the track.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ZoneCount {
    pub from_um: f64,
    pub to_um: f64,
    pub count: usize,
    pub fraction: f64,
}

/// Fraction of fronts that reach a distance from their origin.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReliabilityPoint {
    pub distance_um: f64,
    /// Fronts with a recording site at least this far along their path.
    pub fronts_able: usize,
    /// ... of which activated a site at least this far.
    pub fronts_reaching: usize,
    pub fraction: Option<f64>,
}

/// A front that stopped before the end of its path.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PropagationFailure {
    pub burst: usize,
    pub origin_site: String,
    pub reach_um: f64,
    pub available_um: f64,
    pub missed_sites: usize,
}

/// Recording-level results.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Summary {
    pub burst_count: usize,
    /// Observed span of the recording (first to last spike), seconds.
    pub duration_s: Option<f64>,
    pub burst_rate_per_min: Option<f64>,
    pub ibi_median_s: Option<f64>,
    pub ibi: IntervalStats,
    pub front_count: usize,
    pub no_front_count: usize,
    /// Bursts without a front because their sites fired together (no time-position relation).
    pub synchronous_count: usize,
    /// Bursts whose front crossed the sites within their timing jitter or a few time steps:
    /// too fast to measure, never in the speed statistics.
    pub unresolved_count: usize,
    /// Bursts in which fewer sites took part than a front fit needs.
    pub too_few_sites_count: usize,
    /// Site activations re-timed to their earliest spike that fits the front, over all bursts.
    pub retimed_activations: usize,
    /// Site activations set aside as outliers, over all bursts.
    pub outlier_activations: usize,
    /// Every site that activated, with how often it was among a burst's leading sites, most
    /// frequent leader first.
    pub leaders: Vec<super::LeaderCount>,
    /// How alike the activation order is from burst to burst.
    pub order_consistency: super::OrderConsistency,
    /// Median over bursts of the time to recruit 10%, 50% and 90% of the active sites, ms.
    pub median_recruitment_ms: Option<[f64; 3]>,
    pub median_speed_mm_s: Option<f64>,
    pub speed_q25_mm_s: Option<f64>,
    pub speed_q75_mm_s: Option<f64>,
    pub speed_iqr_mm_s: Option<f64>,
    /// Distribution-free interval of the median speed (order statistics).
    pub median_speed_ci95_mm_s: Option<[f64; 2]>,
    pub speed_drift: Option<Drift>,
    /// Fronts per model.
    pub model_counts: Vec<(super::FrontModel, usize)>,
    pub direction: DirectionBalance,
    pub initiation_sites: Vec<InitiationCount>,
    pub initiation_zones: Vec<ZoneCount>,
    pub reliability: Vec<ReliabilityPoint>,
    pub failure_count: usize,
    pub failures: Vec<PropagationFailure>,
}

fn count_kind(bursts: &[BurstResult], kind: NoFrontKind) -> usize {
    bursts
        .iter()
        .filter(|b| b.no_front_kind == Some(kind))
        .count()
}

/// Summarises burst results over the recording.
pub fn summarise(
    bursts: &[BurstResult],
    recording: &Recording,
    track: &TrackFit,
    span_s: Option<(f64, f64)>,
    settings: &AnalysisSettings,
) -> Summary {
    let starts: Vec<f64> = bursts.iter().map(|b| b.start_s).collect();
    let ibi = interval_stats(&starts);
    let duration_s = span_s.map(|(a, b)| b - a);
    let fronts: Vec<(&BurstResult, &super::FrontReport)> = bursts
        .iter()
        .filter_map(|b| b.front.as_ref().map(|f| (b, f)))
        .collect();
    let speeds: Vec<f64> = fronts.iter().map(|(_, f)| f.speed_mm_s).collect();
    let q25 = quantile(&speeds, 0.25);
    let q75 = quantile(&speeds, 0.75);
    let speed_drift = if fronts.len() >= 3 {
        let t_min: Vec<f64> = fronts.iter().map(|(b, _)| b.start_s / 60.0).collect();
        theil_sen(&t_min, &speeds, 0.95).map(|f| Drift {
            slope_mm_s_per_min: f.slope,
            ci95_mm_s_per_min: f.slope_ci,
        })
    } else {
        None
    };
    let mut model_counts: Vec<(super::FrontModel, usize)> = Vec::new();
    for (_, f) in &fronts {
        match model_counts.iter_mut().find(|(m, _)| *m == f.model) {
            Some(entry) => entry.1 += 1,
            None => model_counts.push((f.model, 1)),
        }
    }

    let direction = direction_balance(&track.track, &fronts);
    let along_of = |site: &str| -> Option<f64> {
        let i = recording.sites.iter().position(|s| s.id == site)?;
        track.placements.get(i).map(|p| p.along_um)
    };
    let mut initiation_sites: Vec<InitiationCount> = Vec::new();
    for (_, f) in &fronts {
        match initiation_sites
            .iter_mut()
            .find(|c| c.site == f.origin_site)
        {
            Some(c) => c.count += 1,
            None => initiation_sites.push(InitiationCount {
                site: f.origin_site.clone(),
                along_um: along_of(&f.origin_site),
                count: 1,
                fraction: 0.0,
            }),
        }
    }
    let total = fronts.len().max(1) as f64;
    for c in &mut initiation_sites {
        c.fraction = c.count as f64 / total;
    }
    initiation_sites.sort_by(|a, b| b.count.cmp(&a.count).then(a.site.cmp(&b.site)));
    let initiation_zones = match track.track.length_um() {
        Some(length) if length > 0.0 => {
            let zones = settings.initiation_zones.unwrap_or(4).max(1);
            let width = length / zones as f64;
            (0..zones)
                .map(|z| {
                    let (from_um, to_um) = (z as f64 * width, (z + 1) as f64 * width);
                    let count = fronts
                        .iter()
                        .filter(|(_, f)| {
                            along_of(&f.origin_site).is_some_and(|a| {
                                let zone = ((a / width).floor().max(0.0) as usize).min(zones - 1);
                                zone == z
                            })
                        })
                        .count();
                    ZoneCount {
                        from_um,
                        to_um,
                        count,
                        fraction: count as f64 / total,
                    }
                })
                .collect()
        }
        _ => Vec::new(),
    };

    let max_available = fronts
        .iter()
        .map(|(_, f)| f.available_um)
        .fold(0.0, f64::max);
    let step = track
        .site_spacing_um
        .filter(|s| *s > 0.0)
        .unwrap_or(max_available / 10.0);
    let mut reliability = Vec::new();
    if step > 0.0 {
        let mut d = 0.0;
        while d <= max_available + 1e-9 && reliability.len() < 1000 {
            let able = fronts
                .iter()
                .filter(|(_, f)| f.available_um >= d - 1e-9)
                .count();
            let reaching = fronts
                .iter()
                .filter(|(_, f)| f.available_um >= d - 1e-9 && f.reach_um >= d - 1e-9)
                .count();
            reliability.push(ReliabilityPoint {
                distance_um: d,
                fronts_able: able,
                fronts_reaching: reaching,
                fraction: (able > 0).then(|| reaching as f64 / able as f64),
            });
            d += step;
        }
    }
    let failures: Vec<PropagationFailure> = fronts
        .iter()
        .filter(|(_, f)| f.failed)
        .map(|(b, f)| PropagationFailure {
            burst: b.burst,
            origin_site: f.origin_site.clone(),
            reach_um: f.reach_um,
            available_um: f.available_um,
            missed_sites: f.missed_beyond_reach,
        })
        .collect();
    Summary {
        burst_count: bursts.len(),
        duration_s,
        burst_rate_per_min: duration_s
            .filter(|d| *d > 0.0)
            .map(|d| bursts.len() as f64 / d * 60.0),
        ibi_median_s: ibi.median_s,
        ibi,
        front_count: fronts.len(),
        no_front_count: bursts.len() - fronts.len(),
        synchronous_count: count_kind(bursts, NoFrontKind::Synchronous),
        unresolved_count: count_kind(bursts, NoFrontKind::Unresolved),
        too_few_sites_count: count_kind(bursts, NoFrontKind::TooFewSites),
        retimed_activations: bursts.iter().map(|b| b.retimed_sites).sum(),
        outlier_activations: bursts.iter().map(|b| b.outlier_sites).sum(),
        leaders: super::order::leaders(
            bursts,
            &recording
                .sites
                .iter()
                .map(|s| (s.id.clone(), s.x_um, s.y_um))
                .collect::<Vec<_>>(),
        ),
        order_consistency: super::order::order_consistency(bursts, &settings.order),
        median_recruitment_ms: {
            let r: Vec<[f64; 3]> = bursts
                .iter()
                .filter_map(|b| b.order.recruitment_ms)
                .collect();
            let m = |k: usize| crate::stats::median(&r.iter().map(|v| v[k]).collect::<Vec<_>>());
            match (m(0), m(1), m(2)) {
                (Some(a), Some(b), Some(c)) => Some([a, b, c]),
                _ => None,
            }
        },
        median_speed_mm_s: quantile(&speeds, 0.5),
        speed_q25_mm_s: q25,
        speed_q75_mm_s: q75,
        speed_iqr_mm_s: q25.zip(q75).map(|(a, b)| b - a),
        median_speed_ci95_mm_s: median_interval(&speeds, 0.95),
        speed_drift,
        model_counts,
        direction,
        initiation_sites,
        initiation_zones,
        reliability,
        failure_count: failures.len(),
        failures,
    }
}

fn direction_balance(
    track: &Track,
    fronts: &[(&BurstResult, &super::FrontReport)],
) -> DirectionBalance {
    let count =
        |f: &dyn Fn(&super::FrontReport) -> bool| fronts.iter().filter(|(_, r)| f(r)).count();
    let (kind, first_label, second_label, first, second, two_way) = match track {
        Track::Line { .. } | Track::Polyline { .. } => (
            "line",
            Some("increasing"),
            Some("decreasing"),
            count(&|r| r.travel == Some(LineTravel::Increasing)),
            count(&|r| r.travel == Some(LineTravel::Decreasing)),
            count(&|r| r.model == FrontModel::LineTwoWay),
        ),
        Track::Ring { .. } => (
            "ring",
            Some("ccw"),
            Some("cw"),
            count(&|r| r.rotation == Some(RingTravel::Ccw)),
            count(&|r| r.rotation == Some(RingTravel::Cw)),
            count(&|r| r.rotation == Some(RingTravel::Both)),
        ),
        Track::Plane => (
            "plane",
            None,
            None,
            0,
            0,
            count(&|r| r.model == FrontModel::PointSource),
        ),
    };
    let (mut sx, mut sy, mut n) = (0.0, 0.0, 0usize);
    for (_, r) in fronts {
        if let (Track::Plane, Some(d)) = (track, r.direction_xy) {
            sx += d[0];
            sy += d[1];
            n += 1;
        }
    }
    let one_way = first + second;
    DirectionBalance {
        kind: kind.into(),
        first_label: first_label.map(str::to_string),
        second_label: second_label.map(str::to_string),
        first_count: first,
        second_count: second,
        two_way_count: two_way,
        first_fraction: (one_way > 0).then(|| first as f64 / one_way as f64),
        first_fraction_ci95: wilson_interval(first, one_way, 0.95),
        mean_direction_deg: (n > 0).then(|| libm::atan2(sy, sx).to_degrees()),
        mean_resultant_length: (n > 0).then(|| libm::hypot(sx / n as f64, sy / n as f64)),
    }
}
