//! The whole analysis, with its defaults, on recordings from an independent generator
//! (tests/regimes): sparse single units, heavy-tailed latencies, lying sites, missed sites,
//! background firing on small arrays, point sources near the array's edge, and bursts that
//! do not propagate. For every regime: at least 95% of true fronts reported, the median
//! per-front speed error under 3%, the right model and direction in at least 95%, origins
//! within one site spacing in at least 90%, 95% intervals holding the true speed in 90-98%
//! of fronts, and no front at all where nothing propagates.
//!
//! Thresholds are the acceptance criteria of the issue that asked for this work (common
//! practice, no source); the truth is the generator's own.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod regimes;

use regimes::{generate, Array, Firing, Fronts, Recipe, TrueBurst};
use ringline::fronts::{analyze, AnalysisSettings, BurstResult, FrontReport};
use ringline::geometry::{fit_track, TrackFit, TrackSettings};
use ringline::import::{read_recording, ReadOptions};

struct Measured {
    truth: usize,
    found: usize,
    fronts: usize,
    speed_errors: Vec<f64>,
    model_right: usize,
    direction_right: usize,
    direction_asked: usize,
    origin_right: usize,
    origin_asked: usize,
    covered: usize,
    bursts_detected: usize,
    retimed: usize,
    set_aside: usize,
}

impl Measured {
    /// Two recordings' counts together.
    fn pooled_with(mut self, o: Measured) -> Measured {
        self.truth += o.truth;
        self.found += o.found;
        self.fronts += o.fronts;
        self.speed_errors.extend(o.speed_errors);
        self.model_right += o.model_right;
        self.direction_right += o.direction_right;
        self.direction_asked += o.direction_asked;
        self.origin_right += o.origin_right;
        self.origin_asked += o.origin_asked;
        self.covered += o.covered;
        self.bursts_detected += o.bursts_detected;
        self.retimed += o.retimed;
        self.set_aside += o.set_aside;
        self
    }

    fn median_error(&self) -> f64 {
        let mut v = self.speed_errors.clone();
        v.sort_by(f64::total_cmp);
        if v.is_empty() {
            f64::NAN
        } else {
            v[v.len() / 2]
        }
    }

    fn line(&self, name: &str) -> String {
        format!(
            "{name}: {} true bursts, {} detected ({} matched), {} fronts ({:.1}%); median |speed error| {:.2}%; model right {:.1}%; direction right {:.1}%; origin within a site {:.1}%; 95% CI coverage {:.1}%; {} activations re-timed, {} set aside",
            self.truth,
            self.bursts_detected,
            self.found,
            self.fronts,
            pct(self.fronts, self.truth),
            self.median_error() * 100.0,
            pct(self.model_right, self.fronts),
            pct(self.direction_right, self.direction_asked),
            pct(self.origin_right, self.origin_asked),
            pct(self.covered, self.fronts),
            self.retimed,
            self.set_aside,
        )
    }
}

fn pct(a: usize, b: usize) -> f64 {
    if b == 0 {
        100.0
    } else {
        100.0 * a as f64 / b as f64
    }
}

fn model_name(f: Fronts) -> &'static str {
    match f {
        Fronts::OneWay => "line_one_way",
        Fronts::TwoWay => "line_two_way",
        Fronts::RingOneWay => "ring_one_way",
        Fronts::RingTwoWay => "ring_two_way",
        Fronts::Plane => "plane_wave",
        Fronts::Point => "point_source",
        Fronts::Synchronous => "none",
    }
}

fn analyse(recipe: &Recipe) -> (Vec<BurstResult>, Vec<TrueBurst>, TrackFit, Vec<[f64; 2]>) {
    let g = generate(recipe);
    if let Ok(dir) = std::env::var("REGIME_DUMP") {
        let dir = std::path::Path::new(&dir).join(format!("seed-{}", recipe.seed));
        std::fs::create_dir_all(&dir).unwrap();
        std::fs::write(dir.join("spikes.csv"), &g.spikes_csv).unwrap();
        std::fs::write(dir.join("layout.csv"), &g.layout_csv).unwrap();
    }
    let rec = read_recording(
        ("spikes.csv", g.spikes_csv.as_bytes()),
        ("layout.csv", g.layout_csv.as_bytes()),
        &ReadOptions::default(),
    )
    .unwrap();
    let track = fit_track(&rec.sites, &TrackSettings::default()).unwrap();
    let a = analyze(
        &rec,
        &ringline::events::event_trains(&rec, &AnalysisSettings::default().calcium),
        &track,
        &AnalysisSettings::default(),
        &mut |_, _| {},
    )
    .unwrap();
    (a.bursts, g.truth, track, g.positions)
}

/// The fitted origin as a point in the layout, um.
fn origin_point(f: &FrontReport, track: &TrackFit) -> Option<[f64; 2]> {
    if let Some(xy) = f.origin_xy_um {
        return Some(xy);
    }
    match &track.track {
        ringline::geometry::Track::Ring {
            centre_um,
            radius_um,
            ..
        } => f.origin_angle_deg.map(|a| {
            let a = a.to_radians();
            [
                centre_um[0] + radius_um * a.cos(),
                centre_um[1] + radius_um * a.sin(),
            ]
        }),
        ringline::geometry::Track::Line {
            start_um,
            direction,
            ..
        } => f.origin_along_um.map(|s| {
            [
                start_um[0] + direction[0] * s,
                start_um[1] + direction[1] * s,
            ]
        }),
        _ => None,
    }
}

fn measure(recipe: &Recipe) -> Measured {
    let (bursts, truth, track, _) = analyse(recipe);
    let spacing = recipe.array.spacing_um();
    let mut m = Measured {
        truth: truth.len(),
        found: 0,
        fronts: 0,
        speed_errors: Vec::new(),
        model_right: 0,
        direction_right: 0,
        direction_asked: 0,
        origin_right: 0,
        origin_asked: 0,
        covered: 0,
        bursts_detected: bursts.len(),
        retimed: bursts.iter().map(|b| b.retimed_sites).sum(),
        set_aside: bursts.iter().map(|b| b.outlier_sites).sum(),
    };
    for t in &truth {
        let Some(b) = bursts
            .iter()
            .find(|b| b.start_s - 0.3 <= t.start_s && t.start_s <= b.end_s)
        else {
            continue;
        };
        m.found += 1;
        let Some(f) = &b.front else {
            if std::env::var("REGIME_DEBUG").is_ok() {
                eprintln!("  no front at {:.2} s: {:?}", b.start_s, b.no_front_reason);
            }
            continue;
        };
        m.fronts += 1;
        let Some(v) = t.speed_mm_s else { continue };
        m.speed_errors.push((f.speed_mm_s / v - 1.0).abs());
        if std::env::var("REGIME_DEBUG").is_ok() {
            eprintln!(
                "  front {:.2} s: true {v:.2}, measured {:.2} [{:.2}, {:.2}] ({}), {} sites, sd {:.2} ms",
                t.start_s, f.speed_mm_s, f.speed_ci95_mm_s[0], f.speed_ci95_mm_s[1], f.model, f.sites_used, f.timing_sd_ms
            );
        }
        m.covered += usize::from(f.speed_ci95_mm_s[0] <= v && v <= f.speed_ci95_mm_s[1]);
        m.model_right += usize::from(f.model.to_string() == model_name(t.fronts));
        if let Some(d) = t.direction {
            m.direction_asked += 1;
            m.direction_right += usize::from(
                f.direction_xy
                    .is_some_and(|e| e[0] * d[0] + e[1] * d[1] > 25f64.to_radians().cos()),
            );
        }
        if let Some(r) = t.rotation {
            m.direction_asked += 1;
            let want = if r > 0 { "ccw" } else { "cw" };
            m.direction_right += usize::from(f.rotation.map(|r| r.as_str()) == Some(want));
        }
        if let Some(o) = t.origin_xy {
            m.origin_asked += 1;
            if let Some(p) = origin_point(f, &track) {
                m.origin_right += usize::from((p[0] - o[0]).hypot(p[1] - o[1]) <= spacing);
            }
        }
    }
    m
}

fn check(name: &str, recipe: &Recipe) -> Measured {
    let m = measure(recipe);
    eprintln!("{}", m.line(name));
    assert_meets_criteria(name, &m);
    m
}

fn assert_meets_criteria(name: &str, m: &Measured) {
    let line = m.line(name);
    assert!(m.fronts as f64 >= 0.95 * m.truth as f64, "{line}");
    assert!(m.median_error() < 0.03, "{line}");
    assert!(m.model_right as f64 >= 0.95 * m.fronts as f64, "{line}");
    assert!(
        m.direction_right as f64 >= 0.95 * m.direction_asked as f64,
        "{line}"
    );
    assert!(
        m.origin_right as f64 >= 0.9 * m.origin_asked as f64,
        "{line}"
    );
    let coverage = m.covered as f64 / m.fronts.max(1) as f64;
    assert!((0.90..=0.98).contains(&coverage), "{line}");
}

fn line16() -> Array {
    Array::Line {
        count: 16,
        pitch_um: 375.0,
    }
}

fn ring24() -> Array {
    Array::Ring {
        count: 24,
        radius_um: 1500.0,
    }
}

fn grid8() -> Array {
    Array::Grid {
        side: 8,
        pitch_um: 200.0,
    }
}

const SPARSE: Firing = Firing::Sparse { latency_s: 0.002 };
const DENSE: Firing = Firing::Dense {
    spikes: 10.0,
    jitter_s: 0.002,
};

/// Single units firing 1-3 spikes, 5% of sites missing each burst, background 0.5 Hz.
#[test]
fn sparse_single_units_on_a_line() {
    let r = Recipe {
        miss_probability: 0.05,
        background_hz: 0.5,
        duration_s: 900.0,
        ..Recipe::new(11, line16(), Fronts::OneWay, SPARSE)
    };
    check("sparse line", &r);
}

/// A site in most bursts 20-200 ms off the front (stray pairs early, missed fronts late).
#[test]
fn lying_sites_on_a_line() {
    let r = Recipe {
        liar_probability: 0.8,
        speed_mm_s: 150.0,
        duration_s: 900.0,
        ..Recipe::new(12, line16(), Fronts::OneWay, DENSE)
    };
    let m = check("lying sites, line at 150 mm/s", &r);
    assert!(m.retimed + m.set_aside > 0);
}

/// Heavy-tailed first-spike latency of multi-unit sites.
#[test]
fn heavy_tailed_latencies_on_a_line() {
    let r = Recipe {
        duration_s: 900.0,
        ..Recipe::new(
            13,
            line16(),
            Fronts::OneWay,
            Firing::HeavyTailed {
                floor_s: 0.001,
                scale_s: 0.001,
            },
        )
    };
    check("heavy-tailed latency, line", &r);
}

#[test]
fn two_way_fronts_of_sparse_units() {
    let r = Recipe {
        miss_probability: 0.05,
        duration_s: 900.0,
        ..Recipe::new(14, line16(), Fronts::TwoWay, SPARSE)
    };
    check("two-way line, sparse", &r);
}

#[test]
fn ring_fronts_with_lying_sites() {
    let r = Recipe {
        liar_probability: 0.5,
        duration_s: 900.0,
        ..Recipe::new(15, ring24(), Fronts::RingOneWay, DENSE)
    };
    check("ring one-way, lying sites", &r);
    let r = Recipe {
        miss_probability: 0.05,
        duration_s: 900.0,
        ..Recipe::new(16, ring24(), Fronts::RingTwoWay, SPARSE)
    };
    check("ring two-way, sparse", &r);
}

#[test]
fn plane_waves_on_a_dish_with_lying_sites() {
    let r = Recipe {
        liar_probability: 0.5,
        speed_mm_s: 55.0,
        duration_s: 900.0,
        ..Recipe::new(17, grid8(), Fronts::Plane, DENSE)
    };
    check("dish plane waves, lying sites", &r);
}

/// Point sources, half of them within one pitch of the array's edge.
#[test]
fn point_sources_near_the_edge_of_a_dish() {
    let r = Recipe {
        speed_mm_s: 55.0,
        duration_s: 900.0,
        ..Recipe::new(18, grid8(), Fronts::Point, SPARSE)
    };
    check("dish point sources, sparse", &r);
}

/// Bursts in which every site fires within about a millisecond: no front may be reported.
#[test]
fn synchronous_bursts_give_no_fronts() {
    for (name, array, seed) in [("line", line16(), 21), ("dish", grid8(), 22)] {
        for firing in [DENSE, SPARSE] {
            let r = Recipe {
                liar_probability: 0.3,
                ..Recipe::new(seed, array, Fronts::Synchronous, firing)
            };
            let (bursts, truth, _, _) = analyse(&r);
            let fronts: Vec<_> = bursts.iter().filter_map(|b| b.front.as_ref()).collect();
            let synchronous = bursts
                .iter()
                .filter(|b| {
                    matches!(
                        b.no_front_kind,
                        Some(ringline::fronts::NoFrontKind::Synchronous)
                            | Some(ringline::fronts::NoFrontKind::Unresolved)
                    )
                })
                .count();
            eprintln!(
                "synchronous {name} ({firing:?}): {} true bursts, {} detected, {} fronts, {synchronous} synchronous or unresolved",
                truth.len(),
                bursts.len(),
                fronts.len()
            );
            assert!(
                fronts.is_empty(),
                "{name}: fronts at {:?} mm/s",
                fronts.iter().map(|f| f.speed_mm_s).collect::<Vec<_>>()
            );
            assert!(synchronous as f64 >= 0.95 * truth.len() as f64);
        }
    }
}

/// A 16-site line with 2 Hz background per site: every detected burst is a true one.
#[test]
fn background_on_a_small_array_gives_no_chance_bursts() {
    for (seed, firing) in [(31, DENSE), (32, SPARSE)] {
        let r = Recipe {
            background_hz: 2.0,
            duration_s: 600.0,
            ..Recipe::new(seed, line16(), Fronts::OneWay, firing)
        };
        let (bursts, truth, _, _) = analyse(&r);
        let spurious = bursts
            .iter()
            .filter(|b| {
                !truth
                    .iter()
                    .any(|t| b.start_s - 0.3 <= t.start_s && t.start_s <= b.end_s)
            })
            .count();
        let matched = truth
            .iter()
            .filter(|t| {
                bursts
                    .iter()
                    .any(|b| b.start_s - 0.3 <= t.start_s && t.start_s <= b.end_s)
            })
            .count();
        eprintln!(
            "2 Hz background ({firing:?}): {} true bursts, {} detected, {matched} matched, {spurious} spurious",
            truth.len(),
            bursts.len()
        );
        assert_eq!(spurious, 0);
        assert!(matched as f64 >= 0.95 * truth.len() as f64);
    }
}

/// Slow fronts (25 mm/s, 150 ms over the line) with 2 Hz background per site: about a third
/// of the late sites fire a stray spike before the front reaches them. Three recordings
/// pooled, so that the coverage is judged on over 400 fronts.
#[test]
fn slow_fronts_through_busy_background() {
    let mut pooled: Option<Measured> = None;
    for seed in [41, 43, 44] {
        let r = Recipe {
            background_hz: 2.0,
            speed_mm_s: 25.0,
            duration_s: 900.0,
            ..Recipe::new(seed, line16(), Fronts::OneWay, DENSE)
        };
        let m = measure(&r);
        eprintln!(
            "{}",
            m.line(&format!("slow line, 2 Hz background, seed {seed}"))
        );
        pooled = Some(match pooled {
            None => m,
            Some(p) => p.pooled_with(m),
        });
    }
    assert_meets_criteria("slow line, 2 Hz background, pooled", &pooled.unwrap());
}

/// Calcium imaging of one-way fronts on a 16-ROI line (5.6 mm) at 20 and 50 frames/s, with
/// transients rising over 40 ms, ROIs missing bursts and lone transients between them. The
/// speeds keep the transit at 10 frames or more (20 frames/s: 10 mm/s; 50 frames/s: 25 mm/s).
#[test]
fn imaging_at_20_and_50_frames_per_second() {
    for (fps, speed, seed) in [(20.0, 10.0, 61), (50.0, 25.0, 62)] {
        let r = Recipe {
            speed_mm_s: speed,
            duration_s: 1800.0,
            ..Recipe::new(seed, line16(), Fronts::OneWay, DENSE)
        };
        let g = regimes::image(&r, fps, 0.04);
        let rec = read_recording(
            ("traces.csv", g.traces_csv.as_bytes()),
            ("layout.csv", g.layout_csv.as_bytes()),
            &ReadOptions::default(),
        )
        .unwrap();
        let track = fit_track(&rec.sites, &TrackSettings::default()).unwrap();
        let a = analyze(
            &rec,
            &ringline::events::event_trains(&rec, &AnalysisSettings::default().calcium),
            &track,
            &AnalysisSettings::default(),
            &mut |_, _| {},
        )
        .unwrap();
        let mut m = Measured {
            truth: g.truth.len(),
            found: 0,
            fronts: 0,
            speed_errors: Vec::new(),
            model_right: 0,
            direction_right: 0,
            direction_asked: 0,
            origin_right: 0,
            origin_asked: 0,
            covered: 0,
            bursts_detected: a.bursts.len(),
            retimed: a.bursts.iter().map(|b| b.retimed_sites).sum(),
            set_aside: a.bursts.iter().map(|b| b.outlier_sites).sum(),
        };
        for t in &g.truth {
            let Some(b) = a
                .bursts
                .iter()
                .find(|b| b.start_s - 0.5 <= t.start_s && t.start_s <= b.end_s)
            else {
                continue;
            };
            m.found += 1;
            let Some(f) = &b.front else { continue };
            m.fronts += 1;
            let v = t.speed_mm_s.unwrap();
            m.speed_errors.push((f.speed_mm_s / v - 1.0).abs());
            m.covered += usize::from(f.speed_ci95_mm_s[0] <= v && v <= f.speed_ci95_mm_s[1]);
            m.model_right += usize::from(f.model.to_string() == "line_one_way");
            m.direction_asked += 1;
            let d = t.direction.unwrap();
            m.direction_right += usize::from(
                f.direction_xy
                    .is_some_and(|e| e[0] * d[0] + e[1] * d[1] > 0.9),
            );
        }
        let name = format!("imaging at {fps} frames/s");
        eprintln!("{}", m.line(&name));
        assert_meets_criteria(&name, &m);
    }
}
