//! The report of `ringline analyze`: one JSON document and the CSV tables, built as strings
//! so the command line and the page export the same bytes.

use super::document::{Fact, FactKey};
use super::TrackSummary;
use crate::csv_out::{number, CsvOut};
use crate::fronts::{Analysis, AnalysisSettings, BurstResult, Summary};
use crate::geometry::TrackFit;
use crate::place::Notice;
use crate::recording::{Recording, SourceFile};
use serde::Serialize;
use std::fmt::Write;

/// Version of the analysis document's layout; bump it when a key changes meaning.
pub const ANALYSIS_SCHEMA: u32 = 1;

/// Everything `ringline analyze --json` prints.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AnalysisReport {
    pub schema: u32,
    pub files: Vec<SourceFile>,
    pub track: TrackSummary,
    pub settings: AnalysisSettings,
    pub bursts: Vec<BurstResult>,
    pub summary: Summary,
    pub notices: Vec<Notice>,
    /// Raw voltage only: each electrode's health after spike detection.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub electrodes: Option<Vec<crate::detect::voltage::ElectrodeRow>>,
    /// The spectrum of the population rate and its dominant rhythm (`None` for a recording
    /// shorter than one segment or without events).
    pub rhythm: Option<crate::rhythm::spectrum::RateSpectrum>,
    /// STTC and the order parameter of the sites.
    pub synchrony: Option<crate::synchrony::SynchronySummary>,
    /// Each site as an oscillator, beside the network's burst frequency.
    pub site_rhythms: Option<crate::rhythm::sites::SiteRhythms>,
    /// Responses to the stimuli, when a protocol came with the recording.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub response: Option<crate::response::ResponseReport>,
}

impl AnalysisReport {
    pub fn new(
        recording: &Recording,
        track: &TrackFit,
        settings: &AnalysisSettings,
        analysis: Analysis,
    ) -> Self {
        let mut notices = recording.notices.clone();
        notices.extend(track.notices.iter().cloned());
        notices.extend(analysis.notices);
        AnalysisReport {
            schema: ANALYSIS_SCHEMA,
            files: recording.metadata.sources.clone(),
            track: TrackSummary::of(track),
            settings: settings.clone(),
            bursts: analysis.bursts,
            summary: analysis.summary,
            notices,
            electrodes: None,
            rhythm: None,
            synchrony: None,
            site_rhythms: None,
            response: None,
        }
    }

    /// `bursts.csv`: one row per network burst.
    pub fn bursts_csv(&self) -> String {
        let mut out = CsvOut::new([
            "burst",
            "start_s",
            "end_s",
            "peak_s",
            "spike_count",
            "site_count",
            "active_sites",
            "leading_sites",
            "recruit_10_ms",
            "recruit_50_ms",
            "recruit_90_ms",
            "retimed_sites",
            "outlier_sites",
            "outcome",
            "front_model",
            "no_front_reason",
        ]);
        for b in &self.bursts {
            let recruit = |k: usize| number(b.order.recruitment_ms.map(|r| r[k]));
            out.row([
                b.burst.to_string(),
                b.start_s.to_string(),
                b.end_s.to_string(),
                b.peak_s.to_string(),
                b.spike_count.to_string(),
                b.site_count.to_string(),
                b.order.active_sites.to_string(),
                b.order.leading_sites.join(";"),
                recruit(0),
                recruit(1),
                recruit(2),
                b.retimed_sites.to_string(),
                b.outlier_sites.to_string(),
                b.no_front_kind.map_or("front", |k| k.as_str()).to_string(),
                b.front
                    .as_ref()
                    .map_or(String::new(), |f| f.model.to_string()),
                b.no_front_reason.clone().unwrap_or_default(),
            ]);
        }
        out.finish()
    }

    /// `fronts.csv`: one row per burst with a front.
    pub fn fronts_csv(&self) -> String {
        let mut out = CsvOut::new([
            "burst",
            "model",
            "speed_mm_s",
            "speed_ci95_low_mm_s",
            "speed_ci95_high_mm_s",
            "origin_site",
            "origin_along_um",
            "direction_x",
            "direction_y",
            "rotation",
            "travel",
            "sites_used",
            "r2",
            "residual_rms_ms",
            "timing_sd_ms",
            "transit_ms",
            "start_s",
            "reach_um",
            "available_um",
            "failed",
            "near_resolution_limit",
        ]);
        for b in &self.bursts {
            let Some(f) = &b.front else { continue };
            out.row([
                b.burst.to_string(),
                f.model.to_string(),
                f.speed_mm_s.to_string(),
                f.speed_ci95_mm_s[0].to_string(),
                f.speed_ci95_mm_s[1].to_string(),
                f.origin_site.clone(),
                number(f.origin_along_um),
                number(f.direction_xy.map(|d| d[0])),
                number(f.direction_xy.map(|d| d[1])),
                f.rotation.map_or(String::new(), |r| r.to_string()),
                f.travel.map_or(String::new(), |t| t.to_string()),
                f.sites_used.to_string(),
                f.r2.to_string(),
                f.residual_rms_ms.to_string(),
                f.timing_sd_ms.to_string(),
                f.transit_ms.to_string(),
                f.start_s.to_string(),
                f.reach_um.to_string(),
                f.available_um.to_string(),
                f.failed.to_string(),
                f.near_resolution_limit.to_string(),
            ]);
        }
        out.finish()
    }

    /// `activation.csv`: long format, one row per site activation in a burst.
    pub fn activation_csv(&self) -> String {
        let mut out = CsvOut::new([
            "burst",
            "site",
            "along_um",
            "x_um",
            "y_um",
            "time_s",
            "first_spike_s",
            "used",
            "status",
        ]);
        for b in &self.bursts {
            for a in &b.activations {
                out.row([
                    b.burst.to_string(),
                    a.site.clone(),
                    number(a.along_um),
                    a.x_um.to_string(),
                    a.y_um.to_string(),
                    a.time_s.to_string(),
                    a.first_spike_s.to_string(),
                    a.used.to_string(),
                    a.status.as_str().to_string(),
                ]);
            }
        }
        out.finish()
    }

    /// `leaders.csv`: one row per site that activated in some burst, with how often it led.
    pub fn leaders_csv(&self) -> String {
        let mut out = CsvOut::new([
            "site",
            "x_um",
            "y_um",
            "bursts_active",
            "bursts_leading",
            "lead_fraction",
            "lead_ci95_low",
            "lead_ci95_high",
            "median_rank_fraction",
        ]);
        for r in &self.summary.leaders {
            out.row([
                r.site.clone(),
                r.x_um.to_string(),
                r.y_um.to_string(),
                r.bursts_active.to_string(),
                r.bursts_leading.to_string(),
                r.lead_fraction.to_string(),
                number(r.lead_fraction_ci95.map(|c| c[0])),
                number(r.lead_fraction_ci95.map(|c| c[1])),
                number(r.median_rank_fraction),
            ]);
        }
        out.finish()
    }

    /// Every file `ringline analyze --out` writes, as (name, contents): the command line,
    /// the page and a study run all save exactly these. `electrodes.csv` comes first, for
    /// raw voltage only.
    pub fn output_files(&self) -> Vec<(&'static str, String)> {
        let mut files = Vec::with_capacity(6);
        if let Some(rows) = &self.electrodes {
            files.push(("electrodes.csv", super::electrodes_csv(rows)));
        }
        files.extend([
            ("bursts.csv", self.bursts_csv()),
            ("fronts.csv", self.fronts_csv()),
            ("activation.csv", self.activation_csv()),
            ("leaders.csv", self.leaders_csv()),
            ("spectrum.csv", self.spectrum_csv()),
            ("sttc.csv", self.sttc_csv()),
            ("lags.csv", self.lags_csv()),
            ("sites.csv", self.sites_csv()),
        ]);
        files.extend(self.response_files());
        files.push(("summary.json", self.summary_json()));
        files
    }

    /// `spectrum.csv`: the population rate's Welch density, with the Poisson floor beside it.
    pub fn spectrum_csv(&self) -> String {
        let mut out = CsvOut::new(["frequency_hz", "density_events2_per_s2_hz", "poisson_floor"]);
        if let Some(r) = &self.rhythm {
            for (f, p) in &r.density {
                out.row([f.to_string(), p.to_string(), r.poisson_floor.to_string()]);
            }
        }
        out.finish()
    }

    /// `sttc.csv`: every pair of sites with events (sites in track order), their distance
    /// and STTC (empty where undefined).
    pub fn sttc_csv(&self) -> String {
        let mut out = CsvOut::new(["site_a", "site_b", "distance_um", "sttc"]);
        if let Some(s) = &self.synchrony {
            for p in &s.pairs_table {
                out.row([
                    p.site_a.clone(),
                    p.site_b.clone(),
                    p.distance_um.to_string(),
                    number(p.sttc),
                ]);
            }
        }
        out.finish()
    }

    /// `lags.csv`: each site with its following neighbours along the track: distance, the
    /// bursts both fired in, the median size of their burst-by-burst shift (empty with too
    /// few bursts), the share of bursts in which the second fired after the first, and the
    /// peak of the whole recording's cross-correlogram (positive: second after first).
    pub fn lags_csv(&self) -> String {
        let mut out = CsvOut::new([
            "site_a",
            "site_b",
            "distance_um",
            "bursts",
            "lag_ms",
            "forward_share",
            "correlogram_peak_ms",
            "correlogram_peak_count",
        ]);
        for p in self
            .synchrony
            .iter()
            .flat_map(|s| s.lags.iter())
            .flat_map(|l| &l.table)
        {
            out.row([
                p.site_a.clone(),
                p.site_b.clone(),
                p.distance_um.to_string(),
                p.bursts.to_string(),
                number(p.lag_ms),
                number(p.forward_share),
                number(p.correlogram_peak_ms),
                p.correlogram_peak_count.to_string(),
            ]);
        }
        out.finish()
    }

    /// `sites.csv`: each site's rate and interval regularity, overall and outside bursts.
    pub fn sites_csv(&self) -> String {
        let mut out = CsvOut::new([
            "site",
            "events",
            "rate_hz",
            "isi_cv",
            "events_outside_bursts",
            "intervals_outside_bursts",
            "isi_cv_outside_bursts",
            "isi_median_outside_bursts_s",
            "frequency_alone_hz",
            "regular_alone",
            "maxinterval_bursts",
            "maxinterval_bursts_per_min",
            "maxinterval_median_duration_s",
            "maxinterval_mean_spikes",
            "maxinterval_fraction_in_bursts",
            "logisi_threshold",
            "logisi_threshold_s",
            "logisi_bursts",
            "logisi_bursts_per_min",
            "logisi_median_duration_s",
            "logisi_mean_spikes",
            "logisi_fraction_in_bursts",
        ]);
        for r in self.site_rhythms.iter().flat_map(|s| &s.sites) {
            let mut row = vec![
                r.site.clone(),
                r.events.to_string(),
                r.rate_hz.to_string(),
                number(r.isi_cv),
                r.events_alone.to_string(),
                r.intervals_alone.to_string(),
                number(r.isi_cv_alone),
                number(r.isi_median_alone_s),
                number(r.frequency_alone_hz),
                r.regular_alone.to_string(),
            ];
            let stats = |b: &crate::rhythm::site_bursts::BurstStats| {
                [
                    b.bursts.to_string(),
                    b.rate_per_min.to_string(),
                    number(b.median_duration_s),
                    number(b.mean_spikes),
                    number(b.fraction_in_bursts),
                ]
            };
            row.extend(stats(&r.bursts.max_interval));
            row.push(r.bursts.log_isi_threshold.label().to_string());
            row.push(number(r.bursts.log_isi_threshold.threshold_s()));
            row.extend(stats(&r.bursts.log_isi));
            out.row(row);
        }
        out.finish()
    }

    /// `summary.json`: the summary with the track and the files.
    pub fn summary_json(&self) -> String {
        #[derive(Serialize)]
        struct SummaryFile<'a> {
            schema: u32,
            files: &'a [SourceFile],
            track: &'a TrackSummary,
            summary: &'a Summary,
            rhythm: &'a Option<crate::rhythm::spectrum::RateSpectrum>,
            synchrony: &'a Option<crate::synchrony::SynchronySummary>,
            site_rhythms: &'a Option<crate::rhythm::sites::SiteRhythms>,
            #[serde(skip_serializing_if = "Option::is_none")]
            response: Option<crate::response::ResponseSummary>,
        }
        serde_json::to_string_pretty(&SummaryFile {
            schema: self.schema,
            files: &self.files,
            track: &self.track,
            summary: &self.summary,
            rhythm: &self.rhythm,
            synchrony: &self.synchrony,
            site_rhythms: &self.site_rhythms,
            response: self.response.as_ref().map(|r| r.summary()),
        })
        .unwrap_or_default()
            + "\n"
    }

    /// The results in words, one labelled line each: the terminal report's summary, the
    /// HTML report's and the page's summary table.
    pub fn facts(&self) -> Vec<Fact> {
        let s = &self.summary;
        let mut facts = Vec::new();
        let mut fact = |key, label: &str, text: String, value: Option<f64>| {
            facts.push(Fact::new(key, label, text, value));
        };
        let names: Vec<&str> = self.files.iter().map(|f| f.name.as_str()).collect();
        fact(FactKey::Recording, "Recording", names.join(" + "), None);
        fact(
            FactKey::Track,
            "Track",
            format!("{} ({})", self.track.kind, self.track.reason),
            None,
        );
        let mut text = s.burst_count.to_string();
        if let Some(r) = s.burst_rate_per_min {
            let _ = write!(text, " ({r:.2} per min)");
        }
        fact(FactKey::Bursts, "Bursts", text, Some(s.burst_count as f64));
        if let (Some(m), Some(iqr), Some(cv)) = (s.ibi.median_s, s.ibi.iqr_s, s.ibi.cv) {
            fact(
                FactKey::Interburst,
                "Interburst",
                format!("median {m:.2} s, IQR {iqr:.2} s, CV {cv:.2}"),
                Some(m),
            );
        }
        fact(
            FactKey::Fronts,
            "Fronts",
            format!(
                "{} ({} bursts without a resolvable front: {} synchronous, {} too fast to resolve, {} with too few sites)",
                s.front_count, s.no_front_count, s.synchronous_count, s.unresolved_count, s.too_few_sites_count
            ),
            Some(s.front_count as f64),
        );
        if let Some(first) = s.leaders.first() {
            fact(
                FactKey::Leaders,
                "Leaders",
                format!(
                    "{} led {} of {} bursts ({:.0}%; leading = first {:.0}% of active sites), then {}",
                    first.site,
                    first.bursts_leading,
                    s.burst_count,
                    first.lead_fraction * 100.0,
                    self.settings.order.leading_fraction * 100.0,
                    s.leaders
                        .iter()
                        .skip(1)
                        .take(3)
                        .filter(|r| r.bursts_leading > 0)
                        .map(|r| format!("{} ({})", r.site, r.bursts_leading))
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
                Some(first.lead_fraction),
            );
        }
        if let Some(rho) = s.order_consistency.median_spearman {
            fact(
                FactKey::Order,
                "Order",
                format!(
                    "median Spearman correlation of activation order between bursts {rho:.2} ({} pairs; 1 = the same order every time)",
                    s.order_consistency.pairs
                ),
                Some(rho),
            );
        }
        if let Some([a, b, c]) = s.median_recruitment_ms {
            fact(
                FactKey::Recruitment,
                "Recruitment",
                format!("median time to 10% / 50% / 90% of the active sites {a:.1} / {b:.1} / {c:.1} ms"),
                Some(c),
            );
        }
        if s.retimed_activations + s.outlier_activations > 0 {
            fact(
                FactKey::SiteTiming,
                "Site timing",
                format!(
                    "{} activations re-timed to their earliest spike that fits the front, {} set aside as outliers (see activation.csv)",
                    s.retimed_activations, s.outlier_activations
                ),
                Some((s.retimed_activations + s.outlier_activations) as f64),
            );
        }
        if let Some(m) = s.median_speed_mm_s {
            let v = super::speed_text;
            let mut text = format!("median {} mm/s", v(m));
            if let Some([a, b]) = s.median_speed_ci95_mm_s {
                let _ = write!(text, " (95% CI {} to {} mm/s)", v(a), v(b));
            }
            if let (Some(a), Some(b)) = (s.speed_q25_mm_s, s.speed_q75_mm_s) {
                let _ = write!(text, ", IQR {} to {} mm/s", v(a), v(b));
            }
            fact(FactKey::Speed, "Speed", text, Some(m));
        }
        if let Some(d) = &s.speed_drift {
            fact(
                FactKey::Drift,
                "Drift",
                format!("{:+.3} mm/s per min", d.slope_mm_s_per_min),
                Some(d.slope_mm_s_per_min),
            );
        }
        let d = &s.direction;
        if let (Some(a), Some(b)) = (&d.first_label, &d.second_label) {
            let mut text = format!("{} {}, {} {}", d.first_count, a, d.second_count, b);
            if let (Some(f), Some([lo, hi])) = (d.first_fraction, d.first_fraction_ci95) {
                let _ = write!(
                    text,
                    " ({:.0}% {a}, 95% CI {:.0} to {:.0}%)",
                    f * 100.0,
                    lo * 100.0,
                    hi * 100.0
                );
            }
            let _ = write!(text, "; {} two-way", d.two_way_count);
            fact(FactKey::Direction, "Direction", text, d.first_fraction);
        } else if let (Some(deg), Some(r)) = (d.mean_direction_deg, d.mean_resultant_length) {
            fact(
                FactKey::Direction,
                "Direction",
                format!(
                    "mean {deg:.0} deg from +x, resultant length {r:.2}; {} point sources",
                    d.two_way_count
                ),
                Some(deg),
            );
        }
        if let Some(top) = s.initiation_sites.first() {
            fact(
                FactKey::Initiation,
                "Initiation",
                format!(
                    "most often at {} ({} of {} fronts)",
                    top.site, top.count, s.front_count
                ),
                Some(top.count as f64),
            );
        }
        fact(
            FactKey::Failures,
            "Failures",
            format!(
                "{} fronts stopped before the end of their path",
                s.failure_count
            ),
            Some(s.failure_count as f64),
        );
        match &self.rhythm {
            Some(r) => {
                let verdict = if r.is_rhythm { "a rhythm" } else { "no rhythm" };
                fact(
                    FactKey::Rhythm,
                    "Rhythm",
                    format!(
                        "spectrum peak at {} (bandwidth {}), {} the Poisson floor and {} its surroundings: {verdict} (needs {}; resolution {:.4} Hz, {} segments of {:.0} s)",
                        r.peak_frequency_hz.map_or("-".into(), |f| format!("{f:.3} Hz")),
                        r.peak_bandwidth_hz.map_or("-".into(), |f| format!("{f:.3} Hz")),
                        r.peak_over_floor.map_or("-".into(), |x| format!("{x:.1} x")),
                        r.peak_over_local.map_or("-".into(), |x| format!("{x:.1} x")),
                        r.rhythm_threshold.map_or("-".into(), |x| format!("{x:.1} x")),
                        r.resolution_hz,
                        r.segments_used,
                        r.segment_s
                    ),
                    r.peak_frequency_hz,
                );
            }
            None => fact(
                FactKey::Rhythm,
                "Rhythm",
                "no spectrum (the recording is shorter than one segment)".into(),
                None,
            ),
        }
        if let Some(r) = &self.site_rhythms {
            let sites = r.sites.iter().filter(|s| s.events > 0).count();
            let mean = match (r.mean_frequency_alone_hz, r.mean_frequency_alone_ci95_hz) {
                (Some(m), Some([lo, hi])) => {
                    format!(", their mean frequency {m:.3} Hz (95% CI {lo:.3} to {hi:.3} Hz)")
                }
                (Some(m), None) => format!(", frequency {m:.3} Hz"),
                _ => String::new(),
            };
            fact(
                FactKey::SitesAlone,
                "Sites alone",
                format!(
                    "{} of {sites} sites fire regularly outside bursts{mean}; network bursts at {} (see sites.csv)",
                    r.regular_sites,
                    r.network_frequency_hz
                        .map_or("-".into(), |f| format!("{f:.3} Hz"))
                ),
                Some(r.regular_sites as f64),
            );
            fact(
                FactKey::SiteBursts,
                "Site bursts",
                format!(
                    "{} of {sites} sites burst on their own (MaxInterval); median {} bursts/min per site, {} of spikes in them",
                    r.sites_bursting,
                    r.median_site_burst_rate_per_min
                        .map_or("-".into(), |v| format!("{v:.2}")),
                    r.median_fraction_in_site_bursts
                        .map_or("-".into(), |v| format!("{:.0}%", v * 100.0))
                ),
                Some(r.sites_bursting as f64),
            );
        }
        if let Some(y) = &self.synchrony {
            let sttc = match (y.mean_sttc, &y.sttc_skipped) {
                (Some(m), _) => format!(
                    "mean STTC {m:.3} (median {}) over {} site pairs (window {:.0} ms)",
                    y.median_sttc.map_or("-".into(), |v| format!("{v:.3}")),
                    y.pairs,
                    y.sttc_dt_s * 1e3
                ),
                (None, Some(why)) => why.clone(),
                (None, None) => "no STTC (fewer than two sites with events)".into(),
            };
            let order = y.order.as_ref().map_or("no order parameter".into(), |o| {
                format!(
                    "Kuramoto R {:.3} (chance {:.3} for {:.0} sites with a phase)",
                    o.mean_r, o.chance_r, o.mean_sites_with_phase
                )
            });
            fact(
                FactKey::Synchrony,
                "Synchrony",
                format!("{sttc}; {order}"),
                y.mean_sttc,
            );
            if let Some(l) = &y.lags {
                let speed = match (l.implied_speed_mm_s, l.implied_speed_ci95_mm_s) {
                    (Some(v), Some([lo, hi])) => format!(
                        "imply {} mm/s (95% CI {} to {})",
                        super::speed_text(v),
                        lo.map_or("-".into(), super::speed_text),
                        hi.map_or("no upper bound".into(), super::speed_text)
                    ),
                    (Some(v), None) => format!("imply {} mm/s", super::speed_text(v)),
                    _ => "imply no speed".into(),
                };
                let forward = l.forward_share.map_or(String::new(), |f| {
                    format!(
                        " (fronts towards the track's end in {:.0}% of their bursts)",
                        f * 100.0
                    )
                });
                fact(
                    FactKey::Lags,
                    "Lags",
                    format!(
                        "{} of {} neighbouring pairs have a lag{forward}; they {speed} (see lags.csv)",
                        l.pairs_with_lag, l.pairs
                    ),
                    l.implied_speed_mm_s,
                );
            }
        }
        facts
    }

    /// A terminal summary, every number with its unit.
    pub fn to_text(&self) -> String {
        let mut out = super::document::facts_text(&self.facts());
        out.push_str("\nburst   start (s)  model           speed (mm/s)   95% CI (mm/s)     origin   sites\n");
        for b in &self.bursts {
            match &b.front {
                Some(f) => {
                    let _ = writeln!(
                        out,
                        "{:>5} {:>11.3}  {:<14} {:>12}   {:>7} to {:<7} {:<8} {:>5}{}",
                        b.burst,
                        b.start_s,
                        f.model,
                        super::speed_text(f.speed_mm_s),
                        super::speed_text(f.speed_ci95_mm_s[0]),
                        super::speed_text(f.speed_ci95_mm_s[1]),
                        f.origin_site,
                        f.sites_used,
                        if f.failed { "  stopped" } else { "" }
                    );
                }
                None => {
                    let _ = writeln!(
                        out,
                        "{:>5} {:>11.3}  no front: {}",
                        b.burst,
                        b.start_s,
                        b.no_front_reason.as_deref().unwrap_or("")
                    );
                }
            }
        }
        if let Some(r) = &self.response {
            out.push('\n');
            out.push_str(&r.to_text());
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
