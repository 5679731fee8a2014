//! Leaky integrate-and-fire dynamics with delta synapses, delays and short-term depression,
//! integrated event by event.
//!
//! Between events a neuron's potential (mV above rest) follows the exact solution
//! V(t) = D + (V0 - D) exp(-(t - t0) / tau_m) for its constant drive D; a synaptic arrival
//! adds its weight at once; a neuron whose drive is above threshold crosses it at the
//! analytic time t0 + tau_m ln((D - V0) / (D - theta)). Arrivals are delivered through
//! buckets 0.1 ms wide (at most the shortest delay): within one bucket they are applied in
//! the order they were scheduled, each at its own time, so a spike triggered by an arrival
//! is timed exactly unless an earlier arrival in the same bucket came later in that order,
//! when it may be up to one bucket (0.1 ms) late. Threshold crossings under the drive alone
//! are always exact.
//!
//! Short-term depression follows Tsodyks & Markram 1997 (PNAS 94:719): each presynaptic
//! neuron has resources x in [0, 1] recovering as dx/dt = (1 - x) / tau_rec; a spike uses
//! U x of them, and its synapses deliver J U x.

use super::super::sample::exponential;
use std::cmp::Ordering;
use std::collections::BinaryHeap;
use super::culture::Synapses;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// Membrane parameters; potentials in mV above rest.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NeuronParams {
    pub tau_m_s: f64,
    pub threshold_mv: f64,
    pub reset_mv: f64,
    pub refractory_s: f64,
}

/// Synaptic parameters.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SynapseParams {
    /// Jump caused by one excitatory spike with full resources, mV (times U when depression is on).
    pub excitatory_mv: f64,
    /// Drop caused by one inhibitory spike, mV (inhibitory synapses do not depress).
    pub inhibitory_mv: f64,
    /// Fraction of resources a spike uses (Tsodyks-Markram U); 0 turns depression off.
    pub depression_u: f64,
    /// Recovery time constant of the resources, s.
    pub recovery_s: f64,
}

/// Background input: Poisson kicks per neuron.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NoiseParams {
    pub rate_hz: f64,
    pub amplitude_mv: f64,
}

/// One simulated spike.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Spike {
    pub time_s: f64,
    pub neuron: u32,
}

/// What a run produced.
#[derive(Debug, Clone, PartialEq)]
pub struct Run {
    /// Spikes in time order.
    pub spikes: Vec<Spike>,
    /// Synaptic arrivals delivered (not counting noise kicks).
    pub synaptic_events: u64,
}

#[derive(Clone, Copy)]
struct Event {
    time: f64,
    target: u32,
    /// Version of the target's state for a drive crossing; unused otherwise.
    version: u32,
    weight: f32,
    kind: u8,
}

/// Events too far ahead for the ring, earliest first.
struct Far(Event);

impl PartialEq for Far {
    fn eq(&self, other: &Self) -> bool {
        self.0.time == other.0.time
    }
}
impl Eq for Far {}
impl PartialOrd for Far {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for Far {
    fn cmp(&self, other: &Self) -> Ordering {
        other.0.time.total_cmp(&self.0.time)
    }
}

const ARRIVAL: u8 = 0;
const NOISE: u8 = 1;
const CROSSING: u8 = 2;

#[derive(Clone, Copy)]
struct State {
    v: f64,
    last: f64,
    refractory_until: f64,
    resources: f64,
    last_spike: f64,
    version: u32,
}

/// Everything the integrator needs.
pub struct Network<'a> {
    pub synapses: &'a Synapses,
    pub excitatory: &'a [bool],
    /// Constant drive of each neuron (R I), mV.
    pub drive_mv: &'a [f64],
    pub neuron: &'a NeuronParams,
    pub synapse: &'a SynapseParams,
    pub noise: &'a NoiseParams,
}

/// Integrates the network from t = 0 (all neurons at rest, full resources) to `duration_s`.
/// `forced` spikes are imposed (neuron, time), for example to start a front. `progress`
/// gets the simulated time after each simulated second.
pub fn integrate(
    net: &Network<'_>,
    duration_s: f64,
    forced: &[(u32, f64)],
    rng: &mut ChaCha8Rng,
    progress: &mut dyn FnMut(f64),
) -> Run {
    let n = net.drive_mv.len();
    let min_delay = net.synapses.delays.iter().copied().fold(f32::INFINITY, f32::min) as f64;
    let max_delay = net.synapses.delays.iter().copied().fold(0.0f32, f32::max) as f64;
    let width = if min_delay.is_finite() { min_delay.min(1e-4) } else { 1e-4 };
    // The ring spans at least a second, so nearly every noise kick fits in it; the rest wait
    // in a heap.
    let ring = (((max_delay.max(1.0)) / width).ceil() as usize + 2).max(2);
    let mut buckets: Vec<Vec<Event>> = vec![Vec::new(); ring];
    let mut far: BinaryHeap<Far> = BinaryHeap::new();
    let p = net.neuron;
    let mut state = vec![
        State {
            v: 0.0,
            last: 0.0,
            refractory_until: f64::NEG_INFINITY,
            resources: 1.0,
            last_spike: f64::NEG_INFINITY,
            version: 0,
        };
        n
    ];
    let bucket_of = |t: f64| (t / width).floor() as u64;
    let schedule = |buckets: &mut Vec<Vec<Event>>, far: &mut BinaryHeap<Far>, now_bucket: u64, e: Event| {
        let b = bucket_of(e.time);
        if b < now_bucket + ring as u64 - 1 {
            buckets[(b.max(now_bucket) % ring as u64) as usize].push(e);
        } else {
            far.push(Far(e));
        }
    };
    // Initial noise kicks and drive crossings.
    for j in 0..n {
        if net.noise.rate_hz > 0.0 {
            let t = exponential(rng, 1.0 / net.noise.rate_hz);
            if t < duration_s {
                schedule(&mut buckets, &mut far, 0, Event { time: t, target: j as u32, version: 0, weight: net.noise.amplitude_mv as f32, kind: NOISE });
            }
        }
        if let Some(t) = crossing_time(0.0, 0.0, net.drive_mv[j], p) {
            if t < duration_s {
                schedule(&mut buckets, &mut far, 0, Event { time: t, target: j as u32, version: 0, weight: 0.0, kind: CROSSING });
            }
        }
    }
    for &(j, t) in forced {
        schedule(&mut buckets, &mut far, 0, Event { time: t, target: j, version: u32::MAX, weight: f32::INFINITY, kind: ARRIVAL });
    }
    let mut spikes: Vec<Spike> = Vec::new();
    let mut synaptic_events = 0u64;
    let total_buckets = bucket_of(duration_s) + 1;
    let mut next_report = 1.0;
    let mut current: Vec<Event> = Vec::new();
    for b in 0..total_buckets {
        // Bring far events into the ring as their buckets come within reach.
        while far.peek().is_some_and(|f| bucket_of(f.0.time) < b + ring as u64 - 1) {
            if let Some(Far(e)) = far.pop() {
                buckets[(bucket_of(e.time).max(b) % ring as u64) as usize].push(e);
            }
        }
        std::mem::swap(&mut current, &mut buckets[(b % ring as u64) as usize]);
        for e in current.drain(..) {
            if e.time >= duration_s {
                continue;
            }
            let j = e.target as usize;
            let s = &mut state[j];
            let mut fire = false;
            match e.kind {
                NOISE => {
                    let next = e.time + exponential(rng, 1.0 / net.noise.rate_hz);
                    if next < duration_s {
                        schedule(&mut buckets, &mut far, b, Event { time: next, ..e });
                    }
                    fire = apply_input(s, e.time, e.weight as f64, net.drive_mv[j], p);
                }
                ARRIVAL => {
                    if e.version != u32::MAX {
                        synaptic_events += 1;
                    }
                    fire = apply_input(s, e.time, e.weight as f64, net.drive_mv[j], p);
                }
                _ => {
                    if e.version == s.version && e.time >= s.refractory_until {
                        fire = true;
                    }
                }
            }
            if !fire {
                // The drive may carry the neuron over threshold later: schedule that.
                if e.kind != CROSSING {
                    s.version = s.version.wrapping_add(1);
                    if let Some(t) = crossing_time(s.v, s.last, net.drive_mv[j], p) {
                        if t < duration_s {
                            let version = s.version;
                            schedule(&mut buckets, &mut far, b, Event { time: t, target: j as u32, version, weight: 0.0, kind: CROSSING });
                        }
                    }
                }
                continue;
            }
            // Spike at e.time.
            let t = e.time.max(s.last);
            spikes.push(Spike { time_s: t, neuron: j as u32 });
            s.version = s.version.wrapping_add(1);
            s.v = p.reset_mv;
            s.refractory_until = t + p.refractory_s;
            s.last = s.refractory_until;
            let efficacy = if net.synapse.depression_u > 0.0 {
                let x = 1.0 - (1.0 - s.resources) * libm::exp(-(t - s.last_spike) / net.synapse.recovery_s);
                let used = net.synapse.depression_u * x;
                s.resources = x - used;
                used
            } else {
                1.0
            };
            s.last_spike = t;
            if let Some(tc) = crossing_time(p.reset_mv, s.refractory_until, net.drive_mv[j], p) {
                if tc < duration_s {
                    let version = s.version;
                    schedule(&mut buckets, &mut far, b, Event { time: tc, target: j as u32, version, weight: 0.0, kind: CROSSING });
                }
            }
            let jump = if net.excitatory[j] {
                net.synapse.excitatory_mv * efficacy
            } else {
                -net.synapse.inhibitory_mv
            };
            let (a, z) = (net.synapses.offsets[j] as usize, net.synapses.offsets[j + 1] as usize);
            for k in a..z {
                let arrival = t + net.synapses.delays[k] as f64;
                if arrival < duration_s {
                    let ev = Event {
                        time: arrival,
                        target: net.synapses.targets[k],
                        version: 0,
                        weight: (jump * net.synapses.weights[k] as f64) as f32,
                        kind: ARRIVAL,
                    };
                    let bk = bucket_of(arrival);
                    if bk < b + ring as u64 - 1 {
                        buckets[(bk.max(b + 1) % ring as u64) as usize].push(ev);
                    } else {
                        far.push(Far(ev));
                    }
                }
            }
        }
        let now = (b + 1) as f64 * width;
        if now >= next_report {
            progress(now.min(duration_s));
            next_report += 1.0;
        }
    }
    spikes.sort_by(|a, b| a.time_s.total_cmp(&b.time_s).then(a.neuron.cmp(&b.neuron)));
    Run { spikes, synaptic_events }
}

/// Applies an input of `weight` mV at time `t`; returns whether the neuron reaches threshold.
/// An infinite weight forces a spike (imposed spikes).
fn apply_input(s: &mut State, t: f64, weight: f64, drive: f64, p: &NeuronParams) -> bool {
    if t < s.refractory_until {
        return false;
    }
    if weight.is_infinite() {
        return true;
    }
    if t >= s.last {
        s.v = drive + (s.v - drive) * libm::exp(-(t - s.last) / p.tau_m_s);
        s.last = t;
        s.v += weight;
    } else {
        // An earlier arrival handled after a later one in the same bucket: its jump has
        // decayed by now.
        s.v += weight * libm::exp(-(s.last - t) / p.tau_m_s);
    }
    s.v >= p.threshold_mv
}

/// When a neuron at `v` mV at time `t0` reaches threshold under its drive alone; `None` if never.
fn crossing_time(v: f64, t0: f64, drive: f64, p: &NeuronParams) -> Option<f64> {
    if drive <= p.threshold_mv || v >= p.threshold_mv {
        return None;
    }
    Some(t0 + p.tau_m_s * libm::log((drive - v) / (drive - p.threshold_mv)))
}
