//! Front analysis: for every network burst, when each site activated, which front model fits,
//! its speed and direction with intervals; then the recording-level summary.
//!
//! Speeds are in mm/s, distances in micrometres, times in seconds.

mod activation;
mod consensus;
mod models;
pub mod order;
pub mod regression;
mod summary;

pub use activation::{activation_times, activation_window, ActivationRule, ActivationSettings};
pub use consensus::{settle, ActivationStatus, Settled};
pub use models::{
    choose_model, distance_from_origin, fit_chosen, fit_front, model_name, Estimator, FittedFront,
    FrontModel, FrontPath, FrontPoints, FrontSettings, LineTravel, ModelChoice, ModelScore,
    NoFront, NoFrontKind, Origin, RingTravel,
};
pub use order::{BurstOrder, LeaderCount, OrderConsistency, OrderSettings};
/// Angle of a point seen from a ring track's centre, radians (0 for other tracks).
pub fn ring_angle_of(track: &Track, p: [f64; 2]) -> f64 {
    models::ring_angle(track, p)
}

pub use summary::{
    summarise, DirectionBalance, InitiationCount, PropagationFailure, ReliabilityPoint, Summary,
    ZoneCount,
};

use crate::detect::{detect_bursts, BurstSettings, NetworkBurst};
use crate::geometry::{Track, TrackFit};
use crate::place::Notice;
use crate::recording::Recording;
use serde::{Deserialize, Serialize};

/// Every setting of the analysis, with documented defaults.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct AnalysisSettings {
    /// Event detection on fluorescence traces (not used for spike lists).
    pub calcium: crate::detect::calcium::CalciumSettings,
    pub bursts: BurstSettings,
    pub activation: ActivationSettings,
    pub fronts: FrontSettings,
    /// Number of equal zones along the track for the initiation counts.
    pub initiation_zones: Option<usize>,
    /// Leading sites, recruitment and the consistency of the activation order.
    pub order: OrderSettings,
    /// The spectrum of the population rate.
    pub spectrum: crate::rhythm::spectrum::SpectrumSettings,
    /// STTC and the order parameter.
    pub synchrony: crate::synchrony::SynchronySettings,
    /// When a site counts as firing regularly on its own.
    pub site_rhythm: crate::rhythm::sites::SiteRhythmSettings,
    /// When a site counts as responding to a stimulus.
    pub response: crate::response::ResponseSettings,
}

/// One site's activation in one burst.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Activation {
    pub site: String,
    /// Track coordinate, micrometres (`None` on a plane).
    pub along_um: Option<f64>,
    pub x_um: f64,
    pub y_um: f64,
    /// Activation time, seconds (after any re-timing).
    pub time_s: f64,
    /// The site's first spike in the burst window, seconds (differs from `time_s` when it
    /// was re-timed or another activation rule was chosen).
    pub first_spike_s: f64,
    /// Whether the front fit used it.
    pub used: bool,
    /// What became of it: used, re-timed past a stray spike, set aside, or off the track.
    pub status: ActivationStatus,
}

impl FrontReport {
    /// The reported front's path, for distances along it ([`FrontPath::distance_um`]).
    pub fn path(&self) -> Option<FrontPath> {
        let origin = match (
            self.origin_along_um,
            self.origin_angle_deg,
            self.origin_xy_um,
        ) {
            (Some(along_um), _, _) => Origin::Along { along_um },
            (None, Some(deg), _) => Origin::Angle {
                angle_rad: deg.to_radians(),
            },
            (None, None, Some(xy_um)) => Origin::Point { xy_um },
            (None, None, None) => return None,
        };
        Some(FrontPath {
            model: self.model,
            origin,
            rotation: self.rotation,
            towards_increasing: self.travel.map(|t| t == LineTravel::Increasing),
            direction_xy: self.direction_xy,
        })
    }
}

/// A front as reported to the user.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FrontReport {
    /// `line_one_way`, `line_two_way`, `ring_one_way`, `ring_two_way`, `plane_wave`, `point_source`.
    pub model: FrontModel,
    pub speed_mm_s: f64,
    pub speed_ci95_mm_s: [f64; 2],
    pub speed_ci95_analytic_mm_s: Option<[f64; 2]>,
    /// Site nearest the origin (first reached for one-way lines and plane waves).
    pub origin_site: String,
    pub origin_along_um: Option<f64>,
    pub origin_xy_um: Option<[f64; 2]>,
    pub origin_angle_deg: Option<f64>,
    /// Unit vector of travel in the layout's axes, for one-way line and plane-wave fronts.
    pub direction_xy: Option<[f64; 2]>,
    /// `ccw` or `cw` for one-way ring fronts (layout axes), `both` for two-way ring fronts.
    pub rotation: Option<RingTravel>,
    /// `increasing` or `decreasing` track coordinate, for one-way line fronts.
    pub travel: Option<LineTravel>,
    pub sites_used: usize,
    pub r2: f64,
    pub residual_rms_ms: f64,
    /// Robust SD of the residuals (the sites' timing jitter), ms.
    pub timing_sd_ms: f64,
    /// Time the front took from its first to its last used site, ms.
    pub transit_ms: f64,
    /// Time the front left its origin, seconds.
    pub start_s: f64,
    /// Farthest distance from the origin at which a site activated, micrometres.
    pub reach_um: f64,
    /// Farthest distance from the origin of any recording site in the front's path, micrometres.
    pub available_um: f64,
    /// Recording sites beyond the reach that did not activate.
    pub missed_beyond_reach: usize,
    /// Propagation failure: the front stopped short of two or more recording sites.
    pub failed: bool,
    /// Fastest speed the sampling can resolve over this front's span, mm/s (None without a
    /// known time step).
    pub resolution_limit_mm_s: Option<f64>,
    /// The transit took fewer than 3 x resolution_steps sampling intervals.
    pub near_resolution_limit: bool,
    pub candidates: Vec<ModelScore>,
    pub resamples_used: usize,
}

/// One network burst and its front.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BurstResult {
    /// Counted from 1.
    pub burst: usize,
    pub start_s: f64,
    pub end_s: f64,
    pub peak_s: f64,
    pub spike_count: usize,
    /// Sites with spikes in the window.
    pub site_count: usize,
    pub activations: Vec<Activation>,
    /// The order in which the sites activated: leading sites and recruitment times, whether
    /// or not a front fits.
    pub order: BurstOrder,
    /// Sites re-timed to their earliest spike that fits the front.
    pub retimed_sites: usize,
    /// Sites set aside as outliers (early or late).
    pub outlier_sites: usize,
    pub front: Option<FrontReport>,
    /// Why there is no front: too few sites, synchronous, unresolved or unfitted.
    pub no_front_kind: Option<NoFrontKind>,
    pub no_front_reason: Option<String>,
}

/// The whole analysis of one recording.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Analysis {
    pub bursts: Vec<BurstResult>,
    pub summary: Summary,
    pub notices: Vec<Notice>,
    /// The population rate the bursts were found on (spikes or events per second over all
    /// sites); `None` without events.
    pub population_rate: Option<crate::detect::PopulationRate>,
}

/// The analysis layer's error.
#[derive(Debug, Clone, PartialEq, Serialize, thiserror::Error)]
#[error("analysis: {message}")]
pub struct AnalysisError {
    pub message: String,
}

/// Runs the analysis: bursts, activation times, front fits, summary. `progress(done, total)`
/// is called after each burst.
///
/// Fluorescence traces are first turned into event onsets per ROI
/// ([`crate::detect::calcium`]); each ROI's activation is then its first event in the burst
/// (a cluster of one), and a notice says when fronts cross the field of view in under three
/// frames, too fast for the frame rate to resolve.
pub fn analyze(
    recording: &Recording,
    events: &crate::events::EventTrains,
    track: &TrackFit,
    settings: &AnalysisSettings,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<Analysis, AnalysisError> {
    check_settings(settings)?;
    let mut notices = events.notices.clone();
    let mut settings = std::borrow::Cow::Borrowed(settings);
    let frame_interval_s = events.frame_interval_s;
    let trains_s: &[Vec<f64>] = &events.trains_s;
    if let Some(frame_interval_s) = frame_interval_s {
        // One event per ROI per burst: the activation is the first event, and the population
        // rate is binned by frames and smoothed over at least 5 frames, so that a slow front
        // (a few events per frame interval) still stands out.
        let s = settings.to_mut();
        s.activation.rule = activation::ActivationRule::FirstSpike;
        let p = &mut s.bursts.population_rate;
        p.bin_s = p.bin_s.max(frame_interval_s);
        p.smooth_sd_s = p.smooth_sd_s.max(5.0 * frame_interval_s);
    }
    let settings: &AnalysisSettings = &settings;
    check_span(recording, trains_s, settings)?;
    let mut detection = detect_bursts(trains_s, &settings.bursts);
    if detection.chance_windows_rejected > 0 {
        notices.push(Notice::new(
            crate::place::Place::default(),
            format!(
                "{} candidate bursts were set aside as chance coincidences: they held no more spikes than background firing ({:.2} spikes/s over all sites, outside bursts) puts in a window as long {} times or more per recording by chance",
                detection.chance_windows_rejected,
                detection.background_rate_hz,
                settings.bursts.max_chance_windows
            ),
        ));
    }
    if detection.small_windows_rejected > 0 {
        notices.push(Notice::new(
            crate::place::Place::default(),
            format!(
                "{} candidate bursts were set aside because fewer sites fired in them than a burst needs (bursts.min_sites {}, bursts.min_site_fraction {})",
                detection.small_windows_rejected,
                settings.bursts.min_sites,
                settings.bursts.min_site_fraction
            ),
        ));
    }
    let bursts = std::mem::take(&mut detection.bursts);
    let time_step_s = recording
        .metadata
        .sample_interval_s
        .or(recording.metadata.time_quantum_s);
    if time_step_s.is_none() {
        notices.push(Notice::new(
            crate::place::Place::default(),
            "no sampling interval or time quantum is known, so the speed resolution limit is not reported",
        ));
    }
    let on_track: Vec<bool> = match &track.track {
        Track::Plane => vec![true; recording.sites.len()],
        _ => track.placements.iter().map(|p| !p.off_track).collect(),
    };
    let recording_site: Vec<bool> = trains_s.iter().map(|t| !t.is_empty()).collect();
    let mut results = Vec::with_capacity(bursts.len());
    let mut previous_end = f64::NEG_INFINITY;
    for (k, burst) in bursts.iter().enumerate() {
        let times = activation_times(trains_s, burst, previous_end, &settings.activation);
        let window = activation_window(burst, previous_end, &settings.activation);
        previous_end = burst.end_s;
        results.push(analyse_burst(
            k,
            burst,
            &times,
            trains_s,
            window,
            recording,
            track,
            &on_track,
            &recording_site,
            settings,
            time_step_s,
        ));
        progress(k + 1, bursts.len());
    }
    if let Some(frame) = frame_interval_s {
        if let Some(n) = transit_notice(&results, track, frame) {
            notices.push(n);
        }
    }
    let span = recording.observed_span_s();
    let summary = summarise(&results, recording, track, span, settings);
    Ok(Analysis {
        bursts: results,
        summary,
        notices,
        population_rate: detection.population_rate,
    })
}

/// Imaging: a notice when fronts cross the recorded sites in under three frames, where the
/// frame rate cannot resolve their speed (the fastest resolvable speed is then the sites'
/// extent over three frames).
fn transit_notice(results: &[BurstResult], track: &TrackFit, frame_s: f64) -> Option<Notice> {
    let alongs: Vec<f64> = track.placements.iter().map(|p| p.along_um).collect();
    let extent = match (
        alongs.iter().copied().reduce(f64::min),
        alongs.iter().copied().reduce(f64::max),
    ) {
        (Some(lo), Some(hi)) if hi > lo => hi - lo,
        _ => return None,
    };
    let fastest = extent / (3.0 * frame_s) / 1000.0; // um/s -> mm/s
    let with_bursts = results.len();
    let too_fast = results
        .iter()
        .filter(|b| match &b.front {
            Some(f) => f.available_um / f.speed_mm_s < 3.0 * frame_s * 1000.0,
            None => {
                let times: Vec<f64> = b.activations.iter().map(|a| a.time_s).collect();
                let spread = times.iter().copied().fold(f64::NEG_INFINITY, f64::max)
                    - times.iter().copied().fold(f64::INFINITY, f64::min);
                times.len() >= 2 && spread < 3.0 * frame_s
            }
        })
        .count();
    (with_bursts > 0 && too_fast * 2 >= with_bursts).then(|| {
        Notice::new(
            crate::place::Place::default(),
            format!(
                "{too_fast} of {with_bursts} bursts crossed the imaged sites ({extent:.0} µm) in under 3 frames ({:.0} ms at {:.1} frames/s): speeds above {fastest:.1} mm/s cannot be resolved at this frame rate; image faster or over a longer stretch of the pattern",
                3.0 * frame_s * 1000.0,
                1.0 / frame_s
            ),
        )
    })
}

/// Most bootstrap resamples per front (work and memory grow with them; 100,000 gives a 95%
/// interval's ends to well within their own sampling error).
pub const MAX_RESAMPLES: usize = 100_000;

/// Most time bins any step of the analysis lays over a recording (the population rate, the
/// spectrum, the STTC, the phases): 2^25, 46 hours of 5 ms bins. A span beyond this is almost
/// always one far-out time (a unit mistake or a stray row), and it would otherwise ask for
/// gigabytes.
pub const MAX_TIME_BINS: usize = 1 << 25;

/// A time for a message: plain up to a million seconds, in exponent form beyond.
fn seconds(v: f64) -> String {
    if v.abs() < 1e6 {
        format!("{v} s")
    } else {
        format!("{v:.3e} s")
    }
}

/// Refuses a recording whose events span more time bins than [`MAX_TIME_BINS`] at any of the
/// analysis's time steps, naming the span, the latest event's site and the step.
fn check_span(
    recording: &Recording,
    trains_s: &[Vec<f64>],
    s: &AnalysisSettings,
) -> Result<(), AnalysisError> {
    let Some((first, last)) = crate::recording::trains_span_s(trains_s) else {
        return Ok(());
    };
    let span = last - first;
    for (name, step) in [
        (
            "bursts.population_rate.bin_s",
            s.bursts.population_rate.bin_s,
        ),
        ("spectrum.bin_s", s.spectrum.bin_s),
        ("synchrony.sttc_dt_s", s.synchrony.sttc_dt_s),
        ("synchrony.phase_step_s", s.synchrony.phase_step_s),
    ] {
        let bins = span / step;
        if bins.is_nan() || bins > MAX_TIME_BINS as f64 {
            let latest_where = match &recording.metadata.latest_event {
                Some(place) => format!("the latest read at {place}"),
                None => {
                    let latest_site = trains_s
                        .iter()
                        .enumerate()
                        .filter_map(|(i, t)| t.last().map(|&v| (i, v)))
                        .max_by(|a, b| a.1.total_cmp(&b.1))
                        .and_then(|(i, _)| recording.sites.get(i))
                        .map_or_else(String::new, |site| site.id.clone());
                    format!("the latest at site {latest_site}")
                }
            };
            return Err(AnalysisError {
                message: format!(
                    "the events span {} (from {} to {}, {latest_where}); in bins of {name} = {step} s that is {bins:.3e} bins, more than the limit of {MAX_TIME_BINS}: look for a far-out time (a unit mistake or a stray row), or give a coarser {name}",
                    seconds(span),
                    seconds(first),
                    seconds(last)
                ),
            });
        }
    }
    Ok(())
}

/// Longest lead before a burst in which its activations are sought, s (a limit we chose).
pub const MAX_LEAD_S: f64 = 3600.0;

/// Most zones the initiation counts may divide a track into.
pub const MAX_INITIATION_ZONES: usize = 10_000;

/// Checks every analysis setting against its range; the message names the setting, its
/// value and the range.
pub fn check_settings(s: &AnalysisSettings) -> Result<(), AnalysisError> {
    let bad = |m: String| Err(AnalysisError { message: m });
    let p = &s.bursts.population_rate;
    for (name, v) in [
        ("bursts.population_rate.bin_s", p.bin_s),
        ("bursts.population_rate.smooth_sd_s", p.smooth_sd_s),
        ("bursts.isi_n.max_span_s", s.bursts.isi_n.max_span_s),
        ("activation.cluster_window_s", s.activation.cluster_window_s),
        ("spectrum.bin_s", s.spectrum.bin_s),
        ("synchrony.sttc_dt_s", s.synchrony.sttc_dt_s),
        ("synchrony.phase_step_s", s.synchrony.phase_step_s),
    ] {
        if !(v.is_finite() && v > 0.0) {
            return bad(format!(
                "{name}: expected a time above 0 s, found {}",
                crate::place::number(v)
            ));
        }
    }
    if !(s.fronts.confidence > 0.5 && s.fronts.confidence < 1.0) {
        return bad(format!(
            "fronts.confidence: expected a level between 0.5 and 1, found {}",
            crate::place::number(s.fronts.confidence)
        ));
    }
    for (name, v) in [
        ("spectrum.min_frequency_hz", s.spectrum.min_frequency_hz),
        ("spectrum.max_frequency_hz", s.spectrum.max_frequency_hz),
        (
            "spectrum.periods_per_segment",
            s.spectrum.periods_per_segment,
        ),
    ] {
        if !(v.is_finite() && v > 0.0) {
            return bad(format!(
                "{name}: expected a number above 0, found {}",
                crate::place::number(v)
            ));
        }
    }
    if !(s.spectrum.false_alarm > 0.0 && s.spectrum.false_alarm <= 0.5) {
        return bad(format!(
            "spectrum.false_alarm: expected a probability above 0 and at most 0.5, found {}",
            crate::place::number(s.spectrum.false_alarm)
        ));
    }
    if !(100..=MAX_RESAMPLES).contains(&s.fronts.resamples) {
        return bad(format!(
            "fronts.resamples: expected 100 to {MAX_RESAMPLES} bootstrap resamples, found {}",
            s.fronts.resamples
        ));
    }
    let p = &s.bursts.population_rate;
    if p.smooth_sd_s / p.bin_s > MAX_TIME_BINS as f64 {
        return bad(format!(
            "bursts.population_rate.smooth_sd_s = {} s is {} bins of bursts.population_rate.bin_s = {} s, more than the limit of {MAX_TIME_BINS}",
            crate::place::number(p.smooth_sd_s),
            crate::place::number((p.smooth_sd_s / p.bin_s).round()),
            crate::place::number(p.bin_s)
        ));
    }
    if !(0.0..1.0).contains(&s.bursts.population_rate.edge_fraction) {
        return bad(format!(
            "bursts.population_rate.edge_fraction: expected 0 or more and below 1 (the share of the way from the baseline to the threshold), found {}",
            crate::place::number(s.bursts.population_rate.edge_fraction)
        ));
    }
    let a = &s.activation;
    if !(a.lead_s.is_finite() && (0.0..=MAX_LEAD_S).contains(&a.lead_s)) {
        return bad(format!(
            "activation.lead_s: expected 0 to {MAX_LEAD_S} s before the burst, found {}",
            crate::place::number(a.lead_s)
        ));
    }
    // Counts that size a loop or a sum: bounded so that no sum overflows (limits we chose).
    for (name, v, most) in [
        ("activation.cluster_spikes", a.cluster_spikes, 10_000),
        ("activation.median_of_first", a.median_of_first, 10_000),
        (
            "order.compare_with_next",
            s.order.compare_with_next,
            100_000,
        ),
        ("order.min_common_sites", s.order.min_common_sites, 1 << 30),
        (
            "synchrony.lags.neighbours",
            s.synchrony.lags.neighbours,
            100_000,
        ),
        (
            "synchrony.lags.min_bursts",
            s.synchrony.lags.min_bursts,
            1 << 30,
        ),
        (
            "synchrony.lags.direction_sites",
            s.synchrony.lags.direction_sites,
            100_000,
        ),
        (
            "synchrony.lags.max_burst_spikes",
            s.synchrony.lags.max_burst_spikes,
            1 << 20,
        ),
        (
            "synchrony.lags.resamples",
            s.synchrony.lags.resamples,
            MAX_RESAMPLES,
        ),
        ("synchrony.max_sites", s.synchrony.max_sites, 1 << 20),
    ] {
        if v > most {
            return bad(format!("{name}: expected at most {most}, found {v}"));
        }
    }
    if let Some(zones) = s.initiation_zones {
        if !(1..=MAX_INITIATION_ZONES).contains(&zones) {
            return bad(format!(
                "initiation_zones: expected 1 to {MAX_INITIATION_ZONES} zones along the track, found {zones}"
            ));
        }
    }
    if !(0.0..=1.0).contains(&s.bursts.min_site_fraction) {
        return bad(format!(
            "bursts.min_site_fraction: expected 0 to 1, found {}",
            crate::place::number(s.bursts.min_site_fraction)
        ));
    }
    Ok(())
}

#[allow(clippy::too_many_arguments)]
fn analyse_burst(
    k: usize,
    burst: &NetworkBurst,
    times: &[Option<f64>],
    trains_s: &[Vec<f64>],
    window: (f64, f64),
    recording: &Recording,
    track: &TrackFit,
    on_track: &[bool],
    recording_site: &[bool],
    settings: &AnalysisSettings,
    time_step_s: Option<f64>,
) -> BurstResult {
    let along = |i: usize| track.placements.get(i).map(|p| p.along_um);
    let in_window = |i: usize| -> &[f64] {
        let train = &trains_s[i];
        let a = train.partition_point(|&t| t < window.0);
        let b = train.partition_point(|&t| t <= window.1);
        &train[a..b]
    };
    let mut all = FrontPoints {
        site: Vec::new(),
        along_um: Vec::new(),
        angle_rad: Vec::new(),
        xy_um: Vec::new(),
        t_s: Vec::new(),
    };
    let mut spikes: Vec<&[f64]> = Vec::new();
    for (i, t) in times.iter().enumerate() {
        if let (Some(t), true) = (t, on_track[i]) {
            let xy = recording.sites[i].position_um();
            all.site.push(i);
            all.along_um.push(along(i).unwrap_or(0.0));
            all.angle_rad.push(models::ring_angle(&track.track, xy));
            all.xy_um.push(xy);
            all.t_s.push(*t);
            spikes.push(in_window(i));
        }
    }
    let settle_from = |points: &FrontPoints| {
        settle(
            points,
            &spikes,
            &track.track,
            &settings.fronts,
            &settings.activation,
            time_step_s,
        )
    };
    let mut settled = settle_from(&all);
    // When the rule's times disagree with one front at many sites (a single unit's lone
    // first spike passed over for a later pair, say), the sites' plain first spikes get the
    // same check, and the start that leaves fewer sites re-timed or set aside is kept.
    if settings.activation.consensus
        && settings.activation.rule != ActivationRule::FirstSpike
        && 5 * settled.disagreements() > all.len()
    {
        let mut firsts = all.clone();
        firsts.t_s = spikes
            .iter()
            .zip(&all.t_s)
            .map(|(s, t)| s.first().copied().unwrap_or(*t))
            .collect();
        let other = settle_from(&firsts);
        if other.disagreements() < settled.disagreements() {
            settled = other;
            all = firsts;
        }
    }
    let mut status_of: Vec<Option<(ActivationStatus, f64)>> = vec![None; times.len()];
    for (j, &i) in all.site.iter().enumerate() {
        status_of[i] = Some((settled.status[j], settled.time_s[j]));
    }
    let activations: Vec<Activation> = times
        .iter()
        .enumerate()
        .filter_map(|(i, t)| {
            t.map(|rule_time| {
                let (status, time_s) =
                    status_of[i].unwrap_or((ActivationStatus::OffTrack, rule_time));
                Activation {
                    site: recording.sites[i].id.clone(),
                    along_um: along(i),
                    x_um: recording.sites[i].x_um,
                    y_um: recording.sites[i].y_um,
                    time_s,
                    first_spike_s: in_window(i).first().copied().unwrap_or(rule_time),
                    used: status.used(),
                    status,
                }
            })
        })
        .collect();
    let retimed_sites = settled
        .status
        .iter()
        .filter(|s| **s == ActivationStatus::Retimed)
        .count();
    let outlier_sites = settled.status.iter().filter(|s| s.set_aside()).count();
    let points = &settled.points;
    let seed = settings.fronts.seed.wrapping_add(k as u64);
    let fitted = settled.choice.and_then(|choice| {
        fit_chosen(
            points,
            &all,
            &track.track,
            &choice,
            &settings.fronts,
            seed,
            time_step_s,
        )
    });
    let (front, no_front_kind, no_front_reason) = match fitted {
        Ok(f) => (
            Some(report_front(
                &f,
                points,
                // Sites that fired in the burst, whatever the fit made of them: a set-aside
                // site was reached, so it never counts as a failure of propagation.
                &all.site,
                recording,
                track,
                on_track,
                recording_site,
                time_step_s,
                settings,
            )),
            None,
            None,
        ),
        Err(no) if no.kind == NoFrontKind::TooFewSites => {
            // Say where the others went: silent in the window, off the track, or set aside.
            let fired = times.iter().filter(|t| t.is_some()).count();
            let off_track = fired - all.len();
            let reason = format!(
                "{}: {} of the recording's {} sites fired in the burst window ({:.3} to {:.3} s), {off_track} of them off the track, {outlier_sites} set aside as outliers",
                no.reason,
                fired,
                times.len(),
                window.0,
                window.1
            );
            (None, Some(no.kind), Some(reason))
        }
        Err(no) => (None, Some(no.kind), Some(no.reason)),
    };
    BurstResult {
        burst: k + 1,
        start_s: burst.start_s,
        end_s: burst.end_s,
        peak_s: burst.peak_s,
        spike_count: burst.spike_count,
        site_count: burst.sites.len(),
        order: order::burst_order(&activations, &settings.order),
        activations,
        retimed_sites,
        outlier_sites,
        front,
        no_front_kind,
        no_front_reason,
    }
}

#[allow(clippy::too_many_arguments)]
fn report_front(
    f: &FittedFront,
    points: &FrontPoints,
    activated: &[usize],
    recording: &Recording,
    track: &TrackFit,
    on_track: &[bool],
    recording_site: &[bool],
    time_step_s: Option<f64>,
    settings: &AnalysisSettings,
) -> FrontReport {
    let reach_um = f.distance_um.iter().copied().fold(0.0, f64::max);
    let mut available_um: f64 = 0.0;
    let mut missed = 0;
    let used: std::collections::HashSet<usize> = activated.iter().copied().collect();
    for (i, site) in recording.sites.iter().enumerate() {
        if !(recording_site[i] && on_track[i]) {
            continue;
        }
        let along = track.placements.get(i).map_or(0.0, |p| p.along_um);
        let d = distance_from_origin(f, &track.track, along, site.position_um());
        if d < 0.0 {
            continue;
        }
        available_um = available_um.max(d);
        if d > reach_um + 1e-6 && !used.contains(&i) {
            missed += 1;
        }
    }
    let span_um = {
        let lo = f.distance_um.iter().copied().fold(f64::INFINITY, f64::min);
        (reach_um - lo).max(0.0)
    };
    let steps = settings.fronts.resolution_steps;
    let resolution_limit_mm_s = time_step_s.map(|dt| span_um / (steps * dt) / 1e3);
    let near_resolution_limit = time_step_s.is_some_and(|dt| {
        let transit = span_um / (f.speed_mm_s * 1e3);
        transit < 3.0 * steps * dt
    });
    let origin_site = recording.sites[points.site[f.origin_point]].id.clone();
    let (origin_along_um, origin_angle_deg, origin_xy_um) = f.origin.parts();
    FrontReport {
        model: f.model,
        speed_mm_s: f.speed_mm_s,
        speed_ci95_mm_s: f.speed_ci95_mm_s,
        speed_ci95_analytic_mm_s: f.speed_ci95_analytic_mm_s,
        origin_site,
        origin_along_um,
        origin_xy_um,
        origin_angle_deg,
        direction_xy: f.direction_xy,
        rotation: f.rotation,
        travel: f.towards_increasing.map(|up| {
            if up {
                LineTravel::Increasing
            } else {
                LineTravel::Decreasing
            }
        }),
        sites_used: f.sites_used,
        r2: f.r2,
        residual_rms_ms: f.residual_rms_s * 1e3,
        timing_sd_ms: f.timing_sd_s * 1e3,
        transit_ms: f.transit_s * 1e3,
        start_s: f.start_s,
        reach_um,
        available_um,
        missed_beyond_reach: missed,
        failed: missed >= 2,
        resolution_limit_mm_s,
        near_resolution_limit,
        candidates: f.candidates.clone(),
        resamples_used: f.resamples_used,
    }
}
