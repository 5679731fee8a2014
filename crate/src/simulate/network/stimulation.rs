//! Field stimulation of a simulated culture, graded synaptic block, and the ground truth of
//! both.
//!
//! Model choices (ours, stated so results can be read against them):
//! - **Field stimulation.** Each neuron has its own threshold to the stimulus, drawn from a
//!   Gaussian (`threshold_mean`, `threshold_sd`, in the protocol's unit). A stimulus of
//!   amplitude A makes every neuron with a threshold at or under A fire once,
//!   `direct_latency_s` later (the spike a field pulse evokes directly); what follows
//!   through the synapses is the network's own doing.
//! - **Graded block** (`excitatory_scale`, 1 = none, 0 = all blocked): every excitatory
//!   weight is scaled by it, as a receptor antagonist scales the postsynaptic response.
//! - **The giant component at a block level** is that of the excitatory graph after bond
//!   percolation with each excitatory synapse kept with probability `excitatory_scale`
//!   (Breskin et al. 2006, Phys. Rev. Lett. 97:188102, who model the antagonist as lowering
//!   the share c of working connections). It is one seeded realisation, largest component
//!   with directions ignored (petgraph's union-find, as the in-degree sweep).

use super::culture::Synapses;
use crate::recording::AmplitudeUnit;
use crate::simulate::sample::{normal, uniform};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// A field-stimulation protocol and the neurons' thresholds to it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Stimulation {
    /// The unit of the amplitudes and thresholds.
    #[serde(default = "default_unit")]
    pub unit: AmplitudeUnit,
    /// Mean and SD of the neurons' thresholds, in `unit`.
    pub threshold_mean: f64,
    pub threshold_sd: f64,
    /// The amplitudes given, each `repeats` times, in a seeded shuffled order.
    pub amplitudes: Vec<f64>,
    pub repeats: usize,
    /// The first stimulus, s (the time before it is the spontaneous baseline).
    pub start_s: f64,
    /// Time between stimuli, s.
    pub interval_s: f64,
    /// Delay of the directly evoked spike, s.
    #[serde(default = "default_latency")]
    pub direct_latency_s: f64,
}

fn default_unit() -> AmplitudeUnit {
    AmplitudeUnit::Volt
}
fn default_latency() -> f64 {
    0.004
}

/// Most stimuli a scenario may give.
pub const MAX_STIMULI: usize = 10_000;
/// Most directly evoked spikes a scenario may impose.
pub const MAX_FORCED_SPIKES: f64 = 5e7;

impl Stimulation {
    /// Checks the protocol against the run; the message names the field.
    pub fn check(&self, duration_s: f64, neurons: f64) -> Result<(), String> {
        crate::simulate::require_non_negative(&[
            ("stimulation.threshold_mean", self.threshold_mean),
            ("stimulation.start_s", self.start_s),
        ])?;
        crate::simulate::require_positive(&[
            ("stimulation.threshold_sd", self.threshold_sd),
            ("stimulation.interval_s", self.interval_s),
            ("stimulation.direct_latency_s", self.direct_latency_s),
        ])?;
        if self.amplitudes.is_empty()
            || self
                .amplitudes
                .iter()
                .any(|a| !(a.is_finite() && *a >= 0.0))
        {
            return Err(
                "stimulation.amplitudes: expected one or more amplitudes of 0 or more".into(),
            );
        }
        let count = self.amplitudes.len().saturating_mul(self.repeats);
        if count == 0 || count > MAX_STIMULI {
            return Err(format!(
                "stimulation.amplitudes x stimulation.repeats: expected 1 to {MAX_STIMULI} stimuli, found {count}"
            ));
        }
        let last = self.start_s + self.interval_s * (count - 1) as f64;
        if last + self.direct_latency_s >= duration_s {
            return Err(format!(
                "stimulation.start_s + interval_s x (stimuli - 1) + direct_latency_s: the last of {count} stimuli comes at {} s, after the run ends (duration_s {} s); lengthen the run or shorten the interval",
                crate::place::number(last + self.direct_latency_s),
                crate::place::number(duration_s)
            ));
        }
        if neurons * count as f64 > MAX_FORCED_SPIKES {
            return Err(format!(
                "stimulation.amplitudes x stimulation.repeats: {count} stimuli over {neurons:.0} neurons could evoke more than {MAX_FORCED_SPIKES:.0} spikes; give fewer stimuli"
            ));
        }
        Ok(())
    }

    /// The protocol: (time s, amplitude), in time order, the amplitudes shuffled by `seed`.
    pub fn protocol(&self, seed: u64) -> Vec<(f64, f64)> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0x7374_696d);
        let mut order: Vec<f64> = self
            .amplitudes
            .iter()
            .flat_map(|&a| std::iter::repeat_n(a, self.repeats))
            .collect();
        for i in (1..order.len()).rev() {
            let j = ((uniform(&mut rng) * (i + 1) as f64) as usize).min(i);
            order.swap(i, j);
        }
        order
            .into_iter()
            .enumerate()
            .map(|(k, a)| (self.start_s + self.interval_s * k as f64, a))
            .collect()
    }

    /// Each neuron's threshold, from a stream of its own (so adding stimulation leaves the
    /// culture as it was).
    pub fn thresholds(&self, neurons: usize, seed: u64) -> Vec<f64> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0x7468_7265);
        (0..neurons)
            .map(|_| self.threshold_mean + self.threshold_sd * normal(&mut rng))
            .collect()
    }

    /// The directly evoked spikes (neuron, time) of a protocol.
    pub fn forced_spikes(&self, thresholds: &[f64], protocol: &[(f64, f64)]) -> Vec<(u32, f64)> {
        let mut forced = Vec::new();
        for &(t, a) in protocol {
            for (i, &theta) in thresholds.iter().enumerate() {
                if theta <= a {
                    forced.push((i as u32, t + self.direct_latency_s));
                }
            }
        }
        forced
    }

    /// The protocol as a stimulus file (`time_s`, `amplitude_<unit>`, `label`).
    pub fn protocol_csv(&self, protocol: &[(f64, f64)]) -> String {
        let mut out = format!("time_s,amplitude_{},label\n", self.unit.column_suffix());
        for (t, a) in protocol {
            out.push_str(&format!("{t},{a},field\n"));
        }
        out
    }
}

/// What stimulation did, per stimulus.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StimulusTruth {
    pub time_s: f64,
    pub amplitude: f64,
    /// Share of neurons whose threshold the stimulus reached.
    pub directly_fired_fraction: f64,
    /// Share of neurons that fired within `window_s` after it.
    pub fired_fraction: f64,
}

/// The ground truth of a stimulated run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StimulationTruth {
    pub unit: AmplitudeUnit,
    pub threshold_mean: f64,
    pub threshold_sd: f64,
    /// Window after each stimulus in which a neuron counts as having fired, s.
    pub window_s: f64,
    pub stimuli: Vec<StimulusTruth>,
    /// Each electrode's neurons' thresholds (electrode order; a site responds when its
    /// lowest-threshold neuron does, if nothing else fires it).
    pub electrode_thresholds: Vec<Vec<f64>>,
    /// Each ROI's neuron's threshold (ROI order).
    pub roi_thresholds: Vec<f64>,
}

/// The truth of each stimulus: who was reached directly, and who fired in the window.
pub fn stimulus_truth(
    thresholds: &[f64],
    protocol: &[(f64, f64)],
    trains: &[Vec<f64>],
    window_s: f64,
) -> Vec<StimulusTruth> {
    let n = thresholds.len().max(1) as f64;
    protocol
        .iter()
        .map(|&(t, a)| {
            let direct = thresholds.iter().filter(|&&th| th <= a).count();
            let fired = trains
                .iter()
                .filter(|train| {
                    let k = train.partition_point(|&s| s <= t);
                    train.get(k).is_some_and(|&s| s <= t + window_s)
                })
                .count();
            StimulusTruth {
                time_s: t,
                amplitude: a,
                directly_fired_fraction: direct as f64 / n,
                fired_fraction: fired as f64 / n,
            }
        })
        .collect()
}

/// The giant component's share of the neurons after bond percolation of the excitatory
/// synapses with keep probability `keep` (seeded; inhibitory neurons' synapses are left
/// out, their targets still counted among the neurons).
pub fn percolated_giant_fraction(
    synapses: &Synapses,
    excitatory: &[bool],
    keep: f64,
    seed: u64,
) -> f64 {
    use petgraph::unionfind::UnionFind;
    let n = excitatory.len();
    let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0x6769_616e);
    let mut uf = UnionFind::<u32>::new(n);
    for (i, w) in synapses.offsets.windows(2).enumerate() {
        if !excitatory.get(i).copied().unwrap_or(false) {
            continue;
        }
        for l in &synapses.links[w[0] as usize..w[1] as usize] {
            if uniform(&mut rng) < keep {
                uf.union(i as u32, l.target);
            }
        }
    }
    let labels = uf.into_labeling();
    let mut sizes = std::collections::HashMap::new();
    for l in labels {
        *sizes.entry(l).or_insert(0usize) += 1;
    }
    sizes.values().copied().max().unwrap_or(0) as f64 / n.max(1) as f64
}
