//! Rhythm and synchrony through the spiking-network simulator, against its ground truth.
//!
//! A strip culture whose neurons are slow oscillators (a constant drive just above
//! threshold and a long membrane time constant, so each fires alone at about 0.4-1 Hz),
//! recorded by electrodes that each pick up a neuron or two:
//!
//! - synapses blocked (weights 0, no noise): every site that holds one neuron must report
//!   that neuron's rate alone, 1 / (t_ref + tau_m ln((D - V_reset) / (D - theta))) (the
//!   leaky integrate-and-fire rate; Gerstner et al. 2014), as its frequency outside bursts;
//!   the mean over sites must match the neurons' mean; and the order parameter must sit at
//!   the chance level for independent phases, sqrt(pi) / (2 sqrt(N)).
//! - synapses on (pulse coupling of 1 and 2 mV): the sites entrain, R rises well above
//!   chance and above the blocked culture's, and the spectrum of the population rate peaks
//!   at the network's burst frequency from the simulator's truth, within the peak's width.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod common;

use ringline::fronts::AnalysisSettings;
use ringline::import::{write_layout, write_spike_list, ReadOptions};
use ringline::report::AnalysisReport;
use ringline::simulate::network::{
    isolated_rate_hz, simulate_network, NetworkRecording, NetworkScenario,
};

fn oscillators(blocked: bool, seed: u64) -> NetworkScenario {
    let mut s = common::slow_oscillator_culture(4000.0, 240.0, seed);
    s.drive.mean_mv = 21.0;
    s.drive.sd_mv = 0.4;
    if blocked {
        s.synapse.excitatory_mv = 0.0;
        s.synapse.inhibitory_mv = 0.0;
        s.noise.rate_hz = 0.0;
    }
    let e = s.electrodes.as_mut().unwrap();
    e.pickup_radius_um = 20.0;
    e.detection_probability = 1.0;
    s
}

fn analyse(rec: &NetworkRecording) -> AnalysisReport {
    let (sites, spikes) = rec.electrodes.clone().unwrap();
    ringline::analyze_files(
        ("spikes.csv", write_spike_list(&spikes).as_bytes()),
        ("layout.csv", write_layout(&sites).as_bytes()),
        &ReadOptions::default(),
        &Default::default(),
        &AnalysisSettings::default(),
        &mut |_, _| {},
    )
    .unwrap()
}

#[test]
fn the_isolated_rate_formula_matches_the_simulated_neuron() {
    // The simulator's own neurons, alone: their intervals must be the analytic period.
    let s = oscillators(true, 3);
    let rec = simulate_network(&s, &mut |_, _, _| {}).unwrap();
    let (_, spikes) = rec.electrodes.clone().unwrap();
    let mut checked = 0;
    for (site, truth) in spikes.iter().zip(&rec.truth.electrode_neurons) {
        if let [rate] = truth.isolated_rates_hz[..] {
            if rate > 0.0 && site.times_s.len() > 10 {
                let period = (site.times_s.last().unwrap() - site.times_s[0])
                    / (site.times_s.len() - 1) as f64;
                // Times are sampled at 25 kHz: 40 us over tens of periods.
                assert!((1.0 / period - rate).abs() < 1e-3 * rate, "{}", site.site);
                checked += 1;
            }
        }
    }
    assert!(checked >= 4, "{checked} single-neuron sites");
    assert_eq!(isolated_rate_hz(&s.neuron, 19.0), 0.0);
}

#[test]
fn blocked_sites_report_their_neurons_own_rates() {
    let rec = simulate_network(&oscillators(true, 3), &mut |_, _, _| {}).unwrap();
    let report = analyse(&rec);
    let rhythms = report.site_rhythms.as_ref().unwrap();
    let (mut measured, mut truth) = (Vec::new(), Vec::new());
    for (row, neurons) in rhythms.sites.iter().zip(&rec.truth.electrode_neurons) {
        assert_eq!(row.site, neurons.site);
        if let [rate] = neurons.isolated_rates_hz[..] {
            if rate > 0.0 {
                let f = row
                    .frequency_alone_hz
                    .unwrap_or_else(|| panic!("{}: no frequency alone ({row:?})", row.site));
                assert!(row.regular_alone, "{}", row.site);
                // Within 1%: the median interval of a clock sampled at 25 kHz.
                assert!(
                    (f - rate).abs() < 0.01 * rate,
                    "{}: {f} Hz against {rate}",
                    row.site
                );
                measured.push(f);
                truth.push(rate);
            }
        }
    }
    eprintln!(
        "blocked: {} single-neuron sites, frequencies {:.3}-{:.3} Hz",
        measured.len(),
        truth.iter().copied().fold(f64::INFINITY, f64::min),
        truth.iter().copied().fold(0.0, f64::max)
    );
    assert!(
        measured.len() >= 5,
        "{} single-neuron sites",
        measured.len()
    );
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    assert!((mean(&measured) - mean(&truth)).abs() < 0.01 * mean(&truth));
    // Independent phases: R at chance (within 50% of sqrt(pi) / (2 sqrt(N)); derived in
    // CHECK-VALUES.md; with 240 s of a dozen slow clocks the average is itself noisy).
    let order = report.synchrony.as_ref().unwrap().order.as_ref().unwrap();
    eprintln!(
        "blocked: R {:.3}, chance {:.3}",
        order.mean_r, order.chance_r
    );
    assert!(
        (order.mean_r - order.chance_r).abs() < 0.5 * order.chance_r,
        "R {} against chance {}",
        order.mean_r,
        order.chance_r
    );
}

#[test]
fn coupling_entrains_the_sites_into_the_network_rhythm() {
    let blocked = analyse(&simulate_network(&oscillators(true, 3), &mut |_, _, _| {}).unwrap());
    let r = |a: &AnalysisReport| {
        a.synchrony
            .as_ref()
            .unwrap()
            .order
            .as_ref()
            .unwrap()
            .clone()
    };
    // Pulse-coupled oscillators (excitatory jumps, no depression, no noise); at 2 mV the
    // bursts are sharp enough that the spectrum's harmonics are as tall as the fundamental.
    for weight_mv in [1.0, 2.0] {
        let mut s = oscillators(false, 3);
        s.synapse.excitatory_mv = weight_mv;
        s.synapse.depression_u = 0.0;
        s.noise.rate_hz = 0.0;
        let rec = simulate_network(&s, &mut |_, _, _| {}).unwrap();
        let coupled = analyse(&rec);
        let (on, off) = (r(&coupled), r(&blocked));
        eprintln!(
            "{weight_mv} mV: R blocked {:.3}, coupled {:.3}, chance {:.3}",
            off.mean_r, on.mean_r, on.chance_r
        );
        assert!(on.mean_r > 2.0 * on.chance_r && on.mean_r > off.mean_r + 0.2);
        // The network's burst frequency from the simulator's truth: bursts over the span
        // they cover.
        let t = &rec.truth.bursts;
        assert!(t.len() >= 20, "{} true bursts", t.len());
        let truth_hz = (t.len() - 1) as f64 / (t[t.len() - 1].start_s - t[0].start_s);
        let spectrum = coupled.rhythm.as_ref().unwrap();
        let peak = spectrum.peak_frequency_hz.unwrap();
        eprintln!(
            "{weight_mv} mV: {} true bursts at {truth_hz:.3} Hz; spectrum peak {peak:.3} Hz (bandwidth {:?}, resolution {:.4}), rhythm {}",
            t.len(),
            spectrum.peak_bandwidth_hz,
            spectrum.resolution_hz,
            spectrum.is_rhythm
        );
        assert!(spectrum.is_rhythm);
        let tolerance = spectrum
            .peak_bandwidth_hz
            .unwrap()
            .max(2.0 * spectrum.resolution_hz);
        assert!(
            (peak - truth_hz).abs() <= tolerance,
            "{peak} against {truth_hz}"
        );
    }
}
