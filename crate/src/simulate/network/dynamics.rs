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

/// A scheduled event, 16 bytes: its time, the target with the event kind in the top two
/// bits, and a payload (the weight in mV as f32 bits, or a state version for a crossing).
#[derive(Clone, Copy)]
struct Event {
    time: f64,
    target_kind: u32,
    payload: u32,
}

const ARRIVAL: u32 = 0;
const NOISE: u32 = 1;
const CROSSING: u32 = 2;
const FORCED: u32 = 3;
const KIND_SHIFT: u32 = 30;
const TARGET_MASK: u32 = (1 << KIND_SHIFT) - 1;

impl Event {
    fn new(time: f64, target: u32, kind: u32, payload: u32) -> Self {
        Event {
            time,
            target_kind: target | (kind << KIND_SHIFT),
            payload,
        }
    }
    fn target(&self) -> usize {
        (self.target_kind & TARGET_MASK) as usize
    }
    fn kind(&self) -> u32 {
        self.target_kind >> KIND_SHIFT
    }
    fn weight(&self) -> f64 {
        f64::from(f32::from_bits(self.payload))
    }
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

/// The membrane state every event touches, kept together for the cache.
#[derive(Clone, Copy)]
struct Membrane {
    v: f64,
    last: f64,
    refractory_until: f64,
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

/// The ring of delivery buckets plus a heap for events beyond it.
struct Queue {
    width: f64,
    buckets: Vec<Vec<Event>>,
    far: BinaryHeap<Far>,
}

impl Queue {
    fn bucket_of(&self, t: f64) -> u64 {
        (t / self.width).floor() as u64
    }

    /// Schedules `e` while bucket `now` is being processed (events never go before it).
    fn push(&mut self, now: u64, e: Event) {
        let ring = self.buckets.len() as u64;
        let b = self.bucket_of(e.time).max(now);
        if b < now + ring - 1 {
            self.buckets[(b % ring) as usize].push(e);
        } else {
            self.far.push(Far(e));
        }
    }

    /// Moves heap events whose buckets have come within the ring's reach.
    fn pull_near(&mut self, now: u64) {
        let ring = self.buckets.len() as u64;
        while self.far.peek().is_some_and(|f| self.bucket_of(f.0.time) < now + ring - 1) {
            if let Some(Far(e)) = self.far.pop() {
                let b = self.bucket_of(e.time).max(now);
                self.buckets[(b % ring) as usize].push(e);
            }
        }
    }
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
    let p = net.neuron;
    let syn = net.synapses;
    let min_delay = syn.delays.iter().copied().fold(f32::INFINITY, f32::min) as f64;
    let max_delay = syn.delays.iter().copied().fold(0.0f32, f32::max) as f64;
    let width = if min_delay.is_finite() { min_delay.min(1e-4) } else { 1e-4 };
    // The ring spans at least a second, so nearly every noise kick fits in it; the rest wait
    // in the heap.
    let ring = ((max_delay.max(1.0) / width).ceil() as usize + 2).max(2);
    let mut q = Queue {
        width,
        buckets: vec![Vec::new(); ring],
        far: BinaryHeap::new(),
    };
    let mut membrane = vec![
        Membrane {
            v: 0.0,
            last: 0.0,
            refractory_until: f64::NEG_INFINITY,
        };
        n
    ];
    let mut resources = vec![1.0f64; n];
    let mut last_spike = vec![f64::NEG_INFINITY; n];
    let mut version = vec![0u32; n];
    // Only neurons driven above threshold can cross it without input.
    let self_firing: Vec<bool> = net.drive_mv.iter().map(|&d| d > p.threshold_mv).collect();
    let noise_mean = if net.noise.rate_hz > 0.0 { 1.0 / net.noise.rate_hz } else { f64::INFINITY };
    let noise_bits = (net.noise.amplitude_mv as f32).to_bits();
    for j in 0..n {
        if net.noise.rate_hz > 0.0 {
            let t = exponential(rng, noise_mean);
            if t < duration_s {
                q.push(0, Event::new(t, j as u32, NOISE, noise_bits));
            }
        }
        if let Some(t) = crossing_time(0.0, 0.0, net.drive_mv[j], p) {
            if t < duration_s {
                q.push(0, Event::new(t, j as u32, CROSSING, 0));
            }
        }
    }
    for &(j, t) in forced {
        q.push(0, Event::new(t, j, FORCED, 0));
    }
    let mut spikes: Vec<Spike> = Vec::new();
    let mut synaptic_events = 0u64;
    let total_buckets = q.bucket_of(duration_s) + 1;
    let mut next_report = 1.0;
    // Each bucket is taken out when its time comes and its memory freed after, so the ring
    // holds only the events in flight, not every bucket at its largest.
    for b in 0..total_buckets {
        q.pull_near(b);
        let slot = (b % ring as u64) as usize;
        let current = std::mem::take(&mut q.buckets[slot]);
        for e in &current {
            if e.time >= duration_s {
                continue;
            }
            let j = e.target();
            let fire = match e.kind() {
                ARRIVAL => {
                    synaptic_events += 1;
                    apply_input(&mut membrane[j], e.time, e.weight(), net.drive_mv[j], p)
                }
                NOISE => {
                    let next = e.time + exponential(rng, noise_mean);
                    if next < duration_s {
                        q.push(b, Event::new(next, j as u32, NOISE, noise_bits));
                    }
                    apply_input(&mut membrane[j], e.time, e.weight(), net.drive_mv[j], p)
                }
                CROSSING => e.payload == version[j] && e.time >= membrane[j].refractory_until,
                _ => e.time >= membrane[j].refractory_until,
            };
            if !fire {
                if self_firing[j] && e.kind() != CROSSING {
                    // The input moved the potential: the drive's crossing comes at a new time.
                    version[j] = version[j].wrapping_add(1);
                    let m = membrane[j];
                    if let Some(t) = crossing_time(m.v, m.last, net.drive_mv[j], p) {
                        if t < duration_s {
                            q.push(b, Event::new(t, j as u32, CROSSING, version[j]));
                        }
                    }
                }
                continue;
            }
            // Spike at e.time (or at the state's own time when a late-ordered arrival fired it).
            let m = &mut membrane[j];
            let t = e.time.max(m.last);
            spikes.push(Spike { time_s: t, neuron: j as u32 });
            version[j] = version[j].wrapping_add(1);
            m.v = p.reset_mv;
            m.refractory_until = t + p.refractory_s;
            m.last = m.refractory_until;
            let efficacy = if net.synapse.depression_u > 0.0 {
                let x = 1.0 - (1.0 - resources[j]) * libm::exp(-(t - last_spike[j]) / net.synapse.recovery_s);
                let used = net.synapse.depression_u * x;
                resources[j] = x - used;
                used
            } else {
                1.0
            };
            last_spike[j] = t;
            if self_firing[j] {
                if let Some(tc) = crossing_time(p.reset_mv, m.refractory_until, net.drive_mv[j], p) {
                    if tc < duration_s {
                        q.push(b, Event::new(tc, j as u32, CROSSING, version[j]));
                    }
                }
            }
            let jump = if net.excitatory[j] {
                net.synapse.excitatory_mv * efficacy
            } else {
                -net.synapse.inhibitory_mv
            };
            let (a, z) = (syn.offsets[j] as usize, syn.offsets[j + 1] as usize);
            for k in a..z {
                let arrival = t + f64::from(syn.delays[k]);
                if arrival < duration_s {
                    let w = (jump * f64::from(syn.weights[k])) as f32;
                    q.push(b + 1, Event::new(arrival, syn.targets[k], ARRIVAL, w.to_bits()));
                }
            }
        }
        drop(current);
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
fn apply_input(s: &mut Membrane, t: f64, weight: f64, drive: f64, p: &NeuronParams) -> bool {
    if t < s.refractory_until {
        return false;
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
