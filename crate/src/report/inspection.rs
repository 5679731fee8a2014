//! A first look at a recording: sites, spikes, rates and the detected track.

use crate::geometry::{Track, TrackFit};
use crate::place::Notice;
use crate::recording::{Activity, Recording, SourceFile};
use serde::Serialize;
use std::fmt::Write;

/// One site in the inspection table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SiteRow {
    pub site: String,
    pub x_um: f64,
    pub y_um: f64,
    /// Spikes at the site (spike recordings), or calcium events found in the ROI's trace
    /// with the default event settings (traces).
    pub event_count: usize,
    /// Spikes or events per second over the observed span.
    pub rate_hz: Option<f64>,
    /// Traces: frames with a value (not a gap); `None` for spike recordings.
    pub frames_with_data: Option<usize>,
    /// Coordinate along the track, micrometres; `None` on a plane.
    pub along_um: Option<f64>,
    /// Signed distance from the track, micrometres; `None` on a plane.
    pub lateral_um: Option<f64>,
    pub off_track: bool,
    /// No spikes at all.
    pub silent: bool,
}

/// The detected or chosen track, summarised.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TrackSummary {
    /// `line`, `polyline`, `ring` or `plane`.
    pub kind: String,
    /// `auto` or `user`.
    pub chosen_by: String,
    pub reason: String,
    /// Track length (circumference for a ring), micrometres.
    pub length_um: Option<f64>,
    pub radius_um: Option<f64>,
    pub centre_um: Option<[f64; 2]>,
    /// RMS distance of the on-track sites from the track, micrometres.
    pub residual_rms_um: Option<f64>,
    /// Median nearest-neighbour distance between sites, micrometres.
    pub site_spacing_um: Option<f64>,
    /// `residual_rms_um / site_spacing_um`.
    pub relative_residual: Option<f64>,
    pub arc_coverage_deg: Option<f64>,
    pub off_track_sites: Vec<String>,
    /// The full track description.
    pub track: Track,
}

/// What `ringline inspect` reports.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Inspection {
    pub files: Vec<SourceFile>,
    /// `spikes` or `traces`.
    pub activity: String,
    pub site_count: usize,
    pub silent_sites: Vec<String>,
    /// Total spikes (spike recordings); `None` for traces.
    pub spike_count: Option<usize>,
    /// Frames (traces); `None` for spikes.
    pub frame_count: Option<usize>,
    /// First and last time with data, seconds.
    pub span_s: Option<[f64; 2]>,
    /// Length of the span, seconds.
    pub duration_s: Option<f64>,
    /// Median rate over active sites, spikes per second.
    pub median_rate_hz: Option<f64>,
    pub frame_interval_s: Option<f64>,
    pub time_quantum_s: Option<f64>,
    pub sites: Vec<SiteRow>,
    pub track: TrackSummary,
    pub notices: Vec<Notice>,
}

/// Summarises a recording and its track. Rates are spikes over the observed span (first to
/// last spike of the whole recording); a span of zero gives no rates.
pub fn inspect(recording: &Recording, track: &TrackFit) -> Inspection {
    let span = recording.observed_span_s();
    let duration = span.map(|(a, b)| b - a);
    let silent: Vec<String> = recording
        .silent_sites()
        .iter()
        .map(|s| s.to_string())
        .collect();
    let (counts, frames): (Vec<usize>, Option<Vec<usize>>) = match &recording.activity {
        Activity::Spikes { trains_s } => (trains_s.iter().map(Vec::len).collect(), None),
        Activity::Traces {
            time_s,
            frame_interval_s,
            values,
        } => {
            use crate::detect::calcium::{delta_f_over_f, event_onsets, CalciumSettings};
            let c = CalciumSettings::default();
            let rate = 1.0 / frame_interval_s;
            (
                values
                    .iter()
                    .map(|f| event_onsets(&delta_f_over_f(f, rate, &c), time_s, rate, &c).len())
                    .collect(),
                Some(
                    values
                        .iter()
                        .map(|v| v.iter().filter(|x| !x.is_nan()).count())
                        .collect(),
                ),
            )
        }
    };
    let is_spikes = matches!(recording.activity, Activity::Spikes { .. });
    let rate = |count: usize| -> Option<f64> {
        match duration {
            Some(d) if d > 0.0 => Some(count as f64 / d),
            _ => None,
        }
    };
    let sites: Vec<SiteRow> = recording
        .sites
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let placement = track.placements.get(i);
            SiteRow {
                site: s.id.clone(),
                x_um: s.x_um,
                y_um: s.y_um,
                event_count: counts[i],
                rate_hz: rate(counts[i]),
                frames_with_data: frames.as_ref().map(|f| f[i]),
                along_um: placement.map(|p| p.along_um),
                lateral_um: placement.map(|p| p.lateral_um),
                off_track: placement.is_some_and(|p| p.off_track),
                silent: is_spikes && counts[i] == 0,
            }
        })
        .collect();
    let mut active_rates: Vec<f64> = sites
        .iter()
        .filter(|r| !r.silent)
        .filter_map(|r| r.rate_hz)
        .collect();
    active_rates.sort_by(f64::total_cmp);
    let median_rate_hz = match active_rates.len() {
        0 => None,
        n if n % 2 == 1 => Some(active_rates[n / 2]),
        n => Some(0.5 * (active_rates[n / 2 - 1] + active_rates[n / 2])),
    };
    let mut notices = recording.notices.clone();
    notices.extend(track.notices.iter().cloned());
    Inspection {
        files: recording.metadata.sources.clone(),
        activity: if is_spikes { "spikes" } else { "traces" }.into(),
        site_count: recording.sites.len(),
        silent_sites: silent,
        spike_count: is_spikes.then(|| counts.iter().sum()),
        frame_count: match &recording.activity {
            Activity::Traces { time_s, .. } => Some(time_s.len()),
            Activity::Spikes { .. } => None,
        },
        span_s: span.map(|(a, b)| [a, b]),
        duration_s: duration,
        median_rate_hz,
        frame_interval_s: match &recording.activity {
            Activity::Traces {
                frame_interval_s, ..
            } => Some(*frame_interval_s),
            Activity::Spikes { .. } => None,
        },
        time_quantum_s: recording.metadata.time_quantum_s,
        sites,
        track: TrackSummary::of(track),
        notices,
    }
}

impl TrackSummary {
    /// Summary of a fitted track.
    pub fn of(track: &TrackFit) -> TrackSummary {
        let (radius_um, centre_um) = match &track.track {
            Track::Ring {
                radius_um,
                centre_um,
                ..
            } => (Some(*radius_um), Some(*centre_um)),
            _ => (None, None),
        };
        TrackSummary {
            kind: track.track.kind_name().into(),
            chosen_by: track.chosen_by.clone(),
            reason: track.reason.clone(),
            length_um: track.track.length_um(),
            radius_um,
            centre_um,
            residual_rms_um: track.residual_rms_um,
            site_spacing_um: track.site_spacing_um,
            relative_residual: match (track.residual_rms_um, track.site_spacing_um) {
                (Some(r), Some(s)) if s > 0.0 => Some(r / s),
                _ => None,
            },
            arc_coverage_deg: track.arc_coverage_deg,
            off_track_sites: track.off_track_sites.clone(),
            track: track.track.clone(),
        }
    }
}

impl Inspection {
    /// Renders the inspection as text for a terminal, every number with its unit.
    pub fn to_text(&self) -> String {
        let mut out = String::new();
        let names: Vec<&str> = self.files.iter().map(|f| f.name.as_str()).collect();
        let _ = writeln!(out, "Recording   {}", names.join(" + "));
        let _ = write!(out, "Sites       {}", self.site_count);
        if self.silent_sites.is_empty() {
            out.push('\n');
        } else {
            let _ = writeln!(
                out,
                " ({} silent: {})",
                self.silent_sites.len(),
                self.silent_sites.join(", ")
            );
        }
        if let Some(n) = self.spike_count {
            let _ = writeln!(out, "Spikes      {n}");
        }
        if let Some(n) = self.frame_count {
            let _ = writeln!(out, "Frames      {n}");
        }
        if let (Some([a, b]), Some(d)) = (self.span_s, self.duration_s) {
            let _ = writeln!(out, "Span        {a:.3} s to {b:.3} s ({d:.3} s)");
        }
        if let Some(r) = self.median_rate_hz {
            let _ = writeln!(out, "Rate        median {r:.3} Hz over active sites");
        }
        if let Some(f) = self.frame_interval_s {
            let _ = writeln!(
                out,
                "Frame rate  {:.3} frames/s (one every {:.3} ms)",
                1.0 / f,
                f * 1e3
            );
        }
        if let Some(q) = self.time_quantum_s {
            let _ = writeln!(
                out,
                "Time step   {} ms (smallest step the file can express)",
                q * 1e3
            );
        }
        let t = &self.track;
        let _ = write!(out, "Track       {} ({})", t.kind, t.chosen_by);
        if let (Some(r), Some(c)) = (t.radius_um, t.centre_um) {
            let _ = write!(
                out,
                ", radius {r:.1} um, centre ({:.1}, {:.1}) um",
                c[0], c[1]
            );
        }
        if let Some(l) = t.length_um {
            let word = if t.radius_um.is_some() {
                "circumference"
            } else {
                "length"
            };
            let _ = write!(out, ", {word} {l:.1} um");
        }
        out.push('\n');
        let _ = writeln!(out, "            {}", t.reason);
        if let (Some(r), Some(s)) = (t.residual_rms_um, t.site_spacing_um) {
            let _ = writeln!(
                out,
                "Fit         residual RMS {r:.2} um = {:.3} x site spacing {s:.1} um",
                r / s
            );
        }
        if let Some(c) = t.arc_coverage_deg {
            let _ = writeln!(out, "Coverage    sites span {c:.1} deg of the ring");
        }
        out.push('\n');
        let _ = writeln!(
            out,
            "{:<12} {:>10} {:>10} {:>8} {:>9} {:>10} {:>10}",
            "site", "x (um)", "y (um)", "events", "rate (Hz)", "along (um)", "off (um)"
        );
        for r in &self.sites {
            let opt = |v: Option<f64>, p: usize| v.map_or("-".to_string(), |x| format!("{x:.p$}"));
            let mut flags = String::new();
            if r.silent {
                flags.push_str(" silent");
            }
            if r.off_track {
                flags.push_str(" off-track");
            }
            let _ = writeln!(
                out,
                "{:<12} {:>10.1} {:>10.1} {:>8} {:>9} {:>10} {:>10}{}",
                r.site,
                r.x_um,
                r.y_um,
                r.event_count,
                opt(r.rate_hz, 3),
                opt(r.along_um, 1),
                opt(r.lateral_um, 1),
                flags
            );
        }
        if !self.notices.is_empty() {
            out.push_str("\nNotices\n");
            for n in &self.notices {
                let _ = writeln!(out, "- {n}");
            }
        }
        out
    }
}
