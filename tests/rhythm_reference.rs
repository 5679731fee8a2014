//! Spectra of the population rate: Welch's method against scipy.signal.welch (the worked
//! values in ../shared/CHECK-VALUES.md and seeded fixtures made by
//! scripts/reference/make_fixtures.py), the Poisson floor 2 lambda (derived), and a rhythm
//! found at the frequency it was simulated at.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use ringline::rhythm::spectrum::{rate_spectrum, welch, Scaling, SpectrumSettings};

fn close(a: &[f64], b: &[f64], rel: f64) {
    assert_eq!(a.len(), b.len());
    for (x, y) in a.iter().zip(b) {
        assert!(
            (x - y).abs() <= rel * y.abs().max(1e-12),
            "{x} against {y} (relative tolerance {rel})"
        );
    }
}

/// scipy.signal.welch, CHECK-VALUES.md: x = 16 zeros with x[0] = x[8] = 1, fs = 1.
#[test]
fn welch_matches_the_worked_scipy_values() {
    let mut x = vec![0.0; 16];
    x[0] = 1.0;
    x[8] = 1.0;
    let w = welch(&x, 1.0, 8, Scaling::Density).unwrap();
    close(&w.frequency_hz, &[0.0, 0.125, 0.25, 0.375, 0.5], 1e-12);
    close(
        &w.power,
        &[0.08333333, 0.15277778, 0.22222222, 0.22222222, 0.11111111],
        1e-6,
    );
    let w = welch(&x, 1.0, 8, Scaling::Spectrum).unwrap();
    close(
        &w.power,
        &[0.015625, 0.02864583, 0.04166667, 0.04166667, 0.02083333],
        1e-6,
    );
    let w = welch(&x, 1.0, 9, Scaling::Density).unwrap();
    close(
        &w.power,
        &[0.12477455, 0.23430933, 0.17072113, 0.17072113, 0.17072113],
        1e-6,
    );
}

/// scipy.signal.welch on seeded series (tests/fixtures/spectrum_reference.json).
#[test]
fn welch_matches_scipy_fixtures() {
    let text = std::fs::read_to_string(format!(
        "{}/../tests/fixtures/spectrum_reference.json",
        env!("CARGO_MANIFEST_DIR")
    ))
    .unwrap();
    let fixture: serde_json::Value = serde_json::from_str(&text).unwrap();
    let numbers = |v: &serde_json::Value| -> Vec<f64> {
        v.as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect()
    };
    let cases = fixture["cases"].as_array().unwrap();
    assert_eq!(cases.len(), 18);
    for case in cases {
        let x = numbers(&fixture["series"][case["series"].as_str().unwrap()]);
        let scaling = match case["scaling"].as_str().unwrap() {
            "density" => Scaling::Density,
            _ => Scaling::Spectrum,
        };
        let nperseg = case["nperseg"].as_u64().unwrap() as usize;
        let w = welch(&x, case["fs_hz"].as_f64().unwrap(), nperseg, scaling).unwrap();
        close(&w.frequency_hz, &numbers(&case["frequency_hz"]), 1e-12);
        close(&w.power, &numbers(&case["power"]), 1e-9);
    }
}

/// A segment with a NaN (a gap) is left out; the others give the same estimate as the
/// series without that segment.
#[test]
fn a_gap_leaves_out_its_segments_only() {
    let mut rng = ChaCha8Rng::seed_from_u64(3);
    let x: Vec<f64> = (0..1024).map(|_| rng.random::<f64>() - 0.5).collect();
    let mut gapped = x.clone();
    gapped[950] = f64::NAN;
    let whole = welch(&x, 10.0, 128, Scaling::Density).unwrap();
    let w = welch(&gapped, 10.0, 128, Scaling::Density).unwrap();
    // Segments of 128 every 64 samples: 15 in all, starting at 0, 64, ..., 896; sample 950
    // lies in the last two (832-959 and 896-1023).
    assert_eq!(
        (whole.segments_used, w.segments_used, w.segments_skipped),
        (15, 13, 2)
    );
    assert!(w.power.iter().all(|p| p.is_finite()));
    let head = welch(&x[..896], 10.0, 128, Scaling::Density).unwrap();
    assert_eq!(head.segments_used, 13);
    close(&w.power, &head.power, 1e-12);
    assert!(welch(&[f64::NAN; 256], 10.0, 128, Scaling::Density).is_none());
}

/// Poisson trains of total rate lambda binned into a rate: flat one-sided density 2 lambda
/// (derived; CHECK-VALUES.md), and no rhythm; the same sites bursting every 8 s give a peak
/// at 0.125 Hz that clears the floor.
#[test]
fn poisson_floor_and_a_simulated_rhythm() {
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let (sites, rate_hz, duration) = (10, 0.5, 3000.0);
    let poisson: Vec<Vec<f64>> = (0..sites)
        .map(|_| {
            let mut t = 0.0;
            let mut train = Vec::new();
            loop {
                t += -(1.0 - rng.random::<f64>()).ln() / rate_hz;
                if t >= duration {
                    break train;
                }
                train.push(t);
            }
        })
        .collect();
    let s = SpectrumSettings::default();
    let spectrum = rate_spectrum(&poisson, (0.0, duration), &s).unwrap();
    let lambda = sites as f64 * rate_hz;
    assert!((spectrum.mean_rate_hz / lambda - 1.0).abs() < 0.05);
    let band: Vec<f64> = spectrum
        .density
        .iter()
        .filter(|(f, _)| *f > 0.2)
        .map(|p| p.1)
        .collect();
    let mean = band.iter().sum::<f64>() / band.len() as f64;
    assert!(
        (mean / (2.0 * lambda) - 1.0).abs() < 0.05,
        "mean density {mean} against the floor {}",
        2.0 * lambda
    );
    assert!(!spectrum.is_rhythm, "{spectrum:?}");

    // Every site fires 5 spikes within 50 ms of each burst, bursts every 8 s +- 0.4 s.
    let mut bursting = poisson.clone();
    let mut t = 5.0;
    while t < duration - 1.0 {
        for train in bursting.iter_mut() {
            for _ in 0..5 {
                train.push(t + 0.05 * rng.random::<f64>());
            }
        }
        t += 8.0 + 0.8 * (rng.random::<f64>() - 0.5);
    }
    for train in bursting.iter_mut() {
        train.sort_by(f64::total_cmp);
    }
    let spectrum = rate_spectrum(&bursting, (0.0, duration), &s).unwrap();
    let peak = spectrum.peak_frequency_hz.unwrap();
    assert!(
        (peak - 0.125).abs() <= spectrum.resolution_hz,
        "peak at {peak} Hz, resolution {} Hz",
        spectrum.resolution_hz
    );
    assert!(spectrum.is_rhythm);
    assert!(spectrum.peak_bandwidth_hz.unwrap() < 0.05);
}

/// The transform behind the spectra against `realfft` (the reference library; ringline
/// computes its own twiddles with libm so that the page and the command line agree bit for
/// bit): powers of two by radix 2, other lengths by the direct sum.
#[test]
fn the_transform_matches_realfft() {
    use realfft::RealFftPlanner;
    use ringline::rhythm::spectrum::Dft;
    let mut rng = ChaCha8Rng::seed_from_u64(8);
    let mut planner = RealFftPlanner::<f64>::new();
    for n in [1usize, 2, 8, 9, 64, 101, 1024, 4096, 5000] {
        let x: Vec<f64> = (0..n).map(|_| rng.random::<f64>() * 10.0 - 3.0).collect();
        let fft = planner.plan_fft_forward(n);
        let mut input = x.clone();
        let mut output = fft.make_output_vec();
        fft.process(&mut input, &mut output).unwrap();
        let want: Vec<f64> = output.iter().map(|c| c.norm_sqr()).collect();
        let mut got = vec![0.0; n / 2 + 1];
        Dft::new(n).unwrap().power(&x, &mut got);
        let scale = want.iter().cloned().fold(0.0, f64::max);
        for (k, (g, w)) in got.iter().zip(&want).enumerate() {
            assert!(
                (g - w).abs() <= 1e-11 * scale,
                "n {n}, bin {k}: {g} against {w}"
            );
        }
    }
    assert!(Dft::new(0).is_none());
    assert!(
        Dft::new(8193).is_none(),
        "long lengths must be powers of two"
    );
}

/// A recording spanning years is binned more coarsely, not allocated bin by bin: the bin
/// used widens so that the rate has at most 2^24 bins.
#[test]
fn a_very_long_recording_widens_the_bin() {
    use ringline::rhythm::spectrum::MAX_RATE_BINS;
    // 56 hours: 2e7 bins of 10 ms would be more than 2^24.
    let trains = vec![(0..20_000).map(|k| k as f64 * 10.0).collect::<Vec<f64>>(); 3];
    let s = rate_spectrum(&trains, (0.0, 2e5), &SpectrumSettings::default()).unwrap();
    assert!(
        (s.bin_s - 2e5 / MAX_RATE_BINS as f64).abs() < 1e-12,
        "{}",
        s.bin_s
    );
    assert!((s.mean_rate_hz / (60_000.0 / 2e5) - 1.0).abs() < 1e-6);
    // Years: bins wider than the slowest rhythm's periods allow give no spectrum, at once.
    assert!(rate_spectrum(&trains, (0.0, 1e8), &SpectrumSettings::default()).is_none());
}

/// Sites firing on their own at known frequencies (a jittered clock, CV about 0.05) between
/// network bursts, and Poisson sites: the clocks are found regular at their frequencies
/// (ground truth of this generator), the Poisson sites are not (their CV is 1, from the
/// exponential distribution), and burst spikes never count as firing alone.
#[test]
fn sites_that_fire_on_their_own_are_found_at_their_frequencies() {
    use ringline::rhythm::sites::{site_rhythms, SiteRhythmSettings};
    let mut rng = ChaCha8Rng::seed_from_u64(21);
    let duration = 600.0;
    let bursts: Vec<(f64, f64)> = (0..60)
        .map(|k| (5.0 + 10.0 * k as f64, 5.3 + 10.0 * k as f64))
        .collect();
    let in_burst = |t: f64| bursts.iter().any(|b| t >= b.0 && t <= b.1);
    let truths = [0.2, 0.5, 1.0, 1.7];
    let mut trains: Vec<Vec<f64>> = Vec::new();
    for f in truths {
        let mut t = rng.random::<f64>() / f;
        let mut train = Vec::new();
        while t < duration {
            if !in_burst(t) {
                train.push(t);
            }
            t += (1.0 + 0.05 * (rng.random::<f64>() - 0.5) * 3.46) / f;
        }
        trains.push(train);
    }
    for _ in 0..3 {
        let mut t = 0.0;
        let mut train = Vec::new();
        loop {
            t += -(1.0 - rng.random::<f64>()).ln() / 0.8;
            if t >= duration {
                break;
            }
            train.push(t);
        }
        trains.push(train);
    }
    // Every site also fires 4 spikes in each burst.
    for train in trains.iter_mut() {
        for b in &bursts {
            for _ in 0..4 {
                train.push(b.0 + 0.3 * rng.random::<f64>());
            }
        }
        train.sort_by(f64::total_cmp);
    }
    let names: Vec<String> = (0..trains.len()).map(|i| format!("s{i}")).collect();
    let sites: Vec<(&str, &[f64])> = names
        .iter()
        .zip(&trains)
        .map(|(n, t)| (n.as_str(), t.as_slice()))
        .collect();
    let r = site_rhythms(
        &sites,
        &bursts,
        (0.0, duration),
        Some(0.1),
        &SiteRhythmSettings::default(),
    );
    for (row, f) in r.sites.iter().zip(truths) {
        assert!(row.regular_alone, "{row:?}");
        let got = row.frequency_alone_hz.unwrap();
        assert!((got / f - 1.0).abs() < 0.03, "{} Hz against {f} Hz", got);
    }
    for row in &r.sites[truths.len()..] {
        assert!(!row.regular_alone, "{row:?}");
        let cv = row.isi_cv_alone.unwrap();
        assert!((cv - 1.0).abs() < 0.15, "Poisson CV {cv}");
    }
    assert_eq!(r.regular_sites, truths.len());
    let mean = truths.iter().sum::<f64>() / truths.len() as f64;
    assert!((r.mean_frequency_alone_hz.unwrap() / mean - 1.0).abs() < 0.02);
    let [lo, hi] = r.mean_frequency_alone_ci95_hz.unwrap();
    assert!(lo < mean && mean < hi);
    // Burst spikes are not alone: each site's events alone exclude the 240 burst spikes.
    for (row, train) in r.sites.iter().zip(&trains) {
        assert!(row.events_alone + 240 <= train.len());
    }
}
