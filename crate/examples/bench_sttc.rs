//! Benchmark of the STTC matrix (scripts/bench-sttc): N sites over 10 minutes of network
//! bursts (every 2-8 s, each site firing 2-8 spikes over about 100 ms) and 0.3 Hz of
//! background firing, about 550 events per site. Times the binned matrix against a merge
//! of every pair (the straightforward method, measured alongside), checks that the two
//! agree exactly, and prints how the time grows with the sites.

#![allow(clippy::expect_used)] // a benchmark: a failed expectation is a failed run

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use ringline::synchrony::{sttc, sttc_matrix};
use std::time::Instant;

fn trains(sites: usize, span_s: f64, seed: u64) -> Vec<Vec<f64>> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut bursts = Vec::new();
    let mut t = 1.0;
    while t < span_s - 1.0 {
        bursts.push(t);
        t += rng.random_range(2.0..8.0);
    }
    (0..sites)
        .map(|k| {
            let mut v = Vec::new();
            for &b in &bursts {
                let arrival = b + 0.0002 * k as f64 % 0.05;
                for _ in 0..rng.random_range(2..=8) {
                    v.push(arrival + rng.random_range(0.0..0.1));
                }
            }
            let mut s = rng.random_range(0.0..3.0);
            while s < span_s {
                v.push(s);
                s += -libm::log(1.0 - rng.random_range(0.0..1.0)) / 0.3;
            }
            v.retain(|&x| x < span_s);
            v.sort_by(f64::total_cmp);
            v
        })
        .collect()
}

fn main() {
    let span = (0.0, 600.0);
    let dt = 0.05;
    for sites in [256usize, 512, 1024] {
        let data = trains(sites, span.1, 7);
        let refs: Vec<&[f64]> = data.iter().map(|t| t.as_slice()).collect();
        let events: usize = data.iter().map(Vec::len).sum();
        let start = Instant::now();
        let m = sttc_matrix(&refs, span, dt).expect("within MAX_SITES");
        let binned_s = start.elapsed().as_secs_f64();
        let start = Instant::now();
        let mut equal = true;
        for i in 0..sites {
            for j in i..sites {
                equal &= sttc(refs[i], refs[j], span, dt) == m[[i, j]];
            }
        }
        let merged_s = start.elapsed().as_secs_f64();
        println!(
            "{sites} sites, {events} events, 10 min, dt 50 ms: binned matrix {binned_s:.2} s, pairwise merges {merged_s:.2} s ({:.1}x); identical: {equal}",
            merged_s / binned_s
        );
        assert!(equal, "the binned matrix differs from the merges");
    }
}
