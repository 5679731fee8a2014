//! Round trip through the spiking-network simulator: simulate a culture on a strip and on a
//! ring and in a square dish, record it with virtual electrodes, analyse the spike list as a user would, and
//! compare with the ground truth measured from all neurons' first spikes: median speed
//! within 5%, origins and directions agreeing for more than 90% of bursts.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod common;

use common::demo_network_scenario;
use ringline::fronts::{analyze, AnalysisSettings};
use ringline::geometry::{fit_track, TrackSettings};
use ringline::import::{read_recording, write_layout, write_spike_list, ReadOptions};

fn round_trip(file: &str) {
    round_trip_of(file, demo_network_scenario(file));
}

fn round_trip_of(file: &str, s: ringline::simulate::network::NetworkScenario) {
    let rec = ringline::simulate::network::simulate_network(&s, &mut |_, _, _| {}).unwrap();
    let (sites, spikes) = rec.electrodes.clone().unwrap();
    let recording = read_recording(
        ("s.csv", write_spike_list(&spikes).as_bytes()),
        ("l.csv", write_layout(&sites).as_bytes()),
        &ReadOptions::default(),
    )
    .unwrap();
    let fit = fit_track(&recording.sites, &TrackSettings::default()).unwrap();
    let analysis = analyze(
        &recording,
        &ringline::events::event_trains(&recording, &AnalysisSettings::default().calcium),
        &fit,
        &AnalysisSettings::default(),
        &mut |_, _| {},
    )
    .unwrap();
    let pitch = fit.site_spacing_um.unwrap();
    let (mut truth_speeds, mut speeds) = (Vec::new(), Vec::new());
    let (mut compared, mut agree) = (0, 0);
    for t in &rec.truth.bursts {
        let Some(truth_speed) = t.speed_mm_s else {
            continue;
        };
        let Some(f) = analysis
            .bursts
            .iter()
            .find(|b| b.start_s - 0.2 <= t.start_s && t.start_s <= b.end_s + 0.2)
            .and_then(|b| b.front.as_ref())
        else {
            continue;
        };
        truth_speeds.push(truth_speed);
        speeds.push(f.speed_mm_s);
        compared += 1;
        // The origin: the electrode nearest the truth's origin (taken along the electrode
        // row, or as an angle on the ring) must be within two electrodes of the fitted one.
        let site = sites.iter().find(|x| x.id == f.origin_site).unwrap();
        let ok = match (t.origin_along_um, t.origin_angle_deg) {
            // In a dish: the fitted origin point within two electrode pitches of the truth's.
            _ if t.origin_xy_um.is_some() => match (t.origin_xy_um, f.origin_xy_um) {
                (Some(a), Some(b)) => (a[0] - b[0]).hypot(a[1] - b[1]) <= 2.0 * pitch,
                _ => false,
            },
            (Some(a), _) => {
                let lo = sites.iter().map(|x| x.x_um).fold(f64::INFINITY, f64::min);
                let hi = sites
                    .iter()
                    .map(|x| x.x_um)
                    .fold(f64::NEG_INFINITY, f64::max);
                (a.clamp(lo, hi) - site.x_um).abs() <= 2.0 * pitch
            }
            (None, Some(deg)) => {
                let fitted = site.y_um.atan2(site.x_um).to_degrees();
                let d = (deg - fitted).rem_euclid(360.0);
                let r = site.x_um.hypot(site.y_um);
                d.min(360.0 - d).to_radians() * r <= 2.0 * pitch
            }
            _ => false,
        };
        agree += usize::from(ok);
    }
    let median = |v: &mut Vec<f64>| {
        v.sort_by(f64::total_cmp);
        v[v.len() / 2]
    };
    let (truth, est) = (median(&mut truth_speeds), median(&mut speeds));
    let error = (est / truth - 1.0).abs();
    let agreement = agree as f64 / compared.max(1) as f64;
    eprintln!(
        "{file}: {} neurons, {} true bursts with fronts, {compared} compared; median speed {est:.1} mm/s against {truth:.1} mm/s ({:.2}% off); origins agree for {:.1}%",
        rec.truth.neurons,
        rec.truth.bursts.iter().filter(|b| b.speed_mm_s.is_some()).count(),
        error * 100.0,
        agreement * 100.0
    );
    assert!(compared >= 10);
    assert!(error < 0.05);
    assert!(agreement > 0.9);
}

#[test]
fn strip_culture_round_trip() {
    round_trip("network-strip-16.json");
}

#[test]
fn ring_culture_round_trip() {
    round_trip("network-ring-24.json");
}

/// A square dish from the culture options (2 mm, 8 x 8 electrodes): fronts start anywhere
/// and spread as rings; the truth times each sampled neuron by the median first spike of its
/// neighbourhood, so stray spikes before the front do not pass for its origin.
#[test]
fn dish_culture_round_trip() {
    use ringline::simulate::network::{scenario_from_options, CultureOptions, CultureShape};
    let s = scenario_from_options(&CultureOptions {
        shape: CultureShape::Dish,
        length_um: None,
        width_um: None,
        radius_um: None,
        density_per_mm2: None,
        mean_in_degree: None,
        sigma_um: None,
        electrodes: None,
        rois: 0,
        duration_s: 60.0,
        seed: 1,
    })
    .unwrap();
    round_trip_of("dish from options", s);
}
