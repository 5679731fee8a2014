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
use super::culture::Synapses;
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::cmp::Ordering;
use std::collections::BinaryHeap;

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

/// A scheduled event, 16 bytes: its time, the neuron with the event kind in the top two
/// bits, and a payload (a synapse index for a delivery, a state version for a crossing).
#[derive(Clone, Copy)]
struct Event {
    time: f64,
    target_kind: u32,
    payload: u32,
}

/// A spike's synapses from index `payload` on are due (target = source neuron, time = spike time).
const DELIVERY: u32 = 0;
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

    /// Schedules `e` by its due time `due` rather than its own time (deliveries carry the
    /// spike's time). Deliveries are never further ahead than the longest delay, which the
    /// ring spans.
    fn push_at(&mut self, now: u64, due: f64, e: Event) {
        let ring = self.buckets.len() as u64;
        let b = self.bucket_of(due).max(now);
        self.buckets[(b % ring) as usize].push(e);
    }

    /// Moves heap events whose buckets have come within the ring's reach.
    fn pull_near(&mut self, now: u64) {
        let ring = self.buckets.len() as u64;
        while self
            .far
            .peek()
            .is_some_and(|f| self.bucket_of(f.0.time) < now + ring - 1)
        {
            if let Some(Far(e)) = self.far.pop() {
                let b = self.bucket_of(e.time).max(now);
                self.buckets[(b % ring) as usize].push(e);
            }
        }
    }
}

/// Mutable state of a run.
struct Engine<'a> {
    net: &'a Network<'a>,
    duration_s: f64,
    q: Queue,
    membrane: Vec<Membrane>,
    resources: Vec<f64>,
    last_spike: Vec<f64>,
    version: Vec<u32>,
    self_firing: Vec<bool>,
    spikes: Vec<Spike>,
    synaptic_events: u64,
    /// Jump (mV) each neuron's latest spike delivers, read by its deliveries.
    jump_mv: Vec<f32>,
}

impl Engine<'_> {
    /// An input moved neuron j's potential without a spike: a neuron driven above threshold
    /// now crosses at a new time.
    fn moved(&mut self, j: usize, b: u64) {
        if !self.self_firing[j] {
            return;
        }
        self.version[j] = self.version[j].wrapping_add(1);
        let m = self.membrane[j];
        if let Some(t) = crossing_time(m.v, m.last, self.net.drive_mv[j], self.net.neuron) {
            if t < self.duration_s {
                self.q
                    .push(b, Event::new(t, j as u32, CROSSING, self.version[j]));
            }
        }
    }

    /// Records a spike of neuron `j` at `t` while bucket `b` is processed: reset,
    /// refractoriness, depression, the drive's next crossing, and the first delivery of its
    /// synapses (rows are sorted by delay, so deliveries go out in delay groups).
    fn spike(&mut self, j: usize, t: f64, b: u64) {
        let p = self.net.neuron;
        self.spikes.push(Spike {
            time_s: t,
            neuron: j as u32,
        });
        self.version[j] = self.version[j].wrapping_add(1);
        let m = &mut self.membrane[j];
        m.v = p.reset_mv;
        m.refractory_until = t + p.refractory_s;
        m.last = m.refractory_until;
        let refractory_until = m.refractory_until;
        let syn = self.net.synapse;
        let efficacy = if syn.depression_u > 0.0 {
            let x = 1.0
                - (1.0 - self.resources[j]) * libm::exp(-(t - self.last_spike[j]) / syn.recovery_s);
            let used = syn.depression_u * x;
            self.resources[j] = x - used;
            used
        } else {
            1.0
        };
        self.last_spike[j] = t;
        if self.self_firing[j] {
            if let Some(tc) = crossing_time(p.reset_mv, refractory_until, self.net.drive_mv[j], p) {
                if tc < self.duration_s {
                    self.q
                        .push(b, Event::new(tc, j as u32, CROSSING, self.version[j]));
                }
            }
        }
        let jump = if self.net.excitatory[j] {
            syn.excitatory_mv * efficacy
        } else {
            -syn.inhibitory_mv
        };
        let s = self.net.synapses;
        let (a, z) = (s.offsets[j] as usize, s.offsets[j + 1] as usize);
        if a < z {
            self.jump_mv[j] = jump as f32;
            let first = t + f64::from(s.links[a].delay_s);
            if first < self.duration_s {
                self.q
                    .push_at(b + 1, first, Event::new(t, j as u32, DELIVERY, a as u32));
            }
        }
    }
}

/// Integrates the network from t = 0 (all neurons at rest, full resources) to `duration_s`.
/// `forced` spikes are imposed (neuron, time), for example to start a front. `progress`
/// gets the simulated time after each simulated second. Synapse rows must be sorted by delay
/// (as [`super::culture::wire`] leaves them).
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
    let (min_delay, max_delay) = syn.delay_range_s();
    let width = if min_delay.is_finite() {
        min_delay.min(1e-4)
    } else {
        1e-4
    };
    // The ring spans the longest delay; drive crossings further ahead wait in the heap.
    let ring = ((max_delay / width).ceil() as usize + 2).max(2);
    let mut e = Engine {
        net,
        duration_s,
        q: Queue {
            width,
            buckets: vec![Vec::new(); ring],
            far: BinaryHeap::new(),
        },
        membrane: vec![
            Membrane {
                v: 0.0,
                last: 0.0,
                refractory_until: f64::NEG_INFINITY,
            };
            n
        ],
        resources: vec![1.0; n],
        last_spike: vec![f64::NEG_INFINITY; n],
        version: vec![0; n],
        // Only neurons driven above threshold can cross it without input.
        self_firing: net.drive_mv.iter().map(|&d| d > p.threshold_mv).collect(),
        spikes: Vec::new(),
        synaptic_events: 0,
        jump_mv: vec![0.0; n],
    };
    // Independent Poisson kicks at rate r on each of n neurons are, together, one Poisson
    // process at rate n r whose every kick picks its neuron at random (superposition), so
    // the kicks are drawn bucket by bucket and never queued.
    let population_noise_rate = net.noise.rate_hz * n as f64;
    let noise_gap = if population_noise_rate > 0.0 {
        1.0 / population_noise_rate
    } else {
        f64::INFINITY
    };
    let noise_mv = f64::from(net.noise.amplitude_mv as f32);
    let mut next_noise = if noise_gap.is_finite() {
        exponential(rng, noise_gap)
    } else {
        f64::INFINITY
    };
    for j in 0..n {
        if let Some(t) = crossing_time(0.0, 0.0, net.drive_mv[j], p) {
            if t < duration_s {
                e.q.push(0, Event::new(t, j as u32, CROSSING, 0));
            }
        }
    }
    for &(j, t) in forced {
        e.q.push(0, Event::new(t, j, FORCED, 0));
    }
    let total_buckets = e.q.bucket_of(duration_s) + 1;
    let mut next_report = 1.0;
    let mut current: Vec<Event> = Vec::new();
    for b in 0..total_buckets {
        e.q.pull_near(b);
        let slot = (b % ring as u64) as usize;
        std::mem::swap(&mut current, &mut e.q.buckets[slot]);
        let bucket_end = ((b + 1) as f64 * width).min(duration_s);
        while next_noise < bucket_end {
            let j = rng.random_range(0..n);
            if apply_input(&mut e.membrane[j], next_noise, noise_mv, net.drive_mv[j], p) {
                let t = next_noise.max(e.membrane[j].last);
                e.spike(j, t, b);
            } else {
                e.moved(j, b);
            }
            next_noise += exponential(rng, noise_gap);
        }
        for ev in &current {
            if ev.time >= duration_s {
                continue;
            }
            let j = ev.target();
            match ev.kind() {
                DELIVERY => {
                    // Deliver source j's synapses whose arrivals fall in this bucket; send the
                    // rest on to the bucket of the next delay.
                    let t = ev.time;
                    let jump = f64::from(e.jump_mv[j]);
                    let end = syn.offsets[j + 1] as usize;
                    let mut k = ev.payload as usize;
                    while k < end {
                        let link = syn.links[k];
                        let arrival = t + f64::from(link.delay_s);
                        if arrival >= duration_s {
                            break;
                        }
                        let bk = e.q.bucket_of(arrival);
                        if bk > b {
                            e.q.push_at(
                                b + 1,
                                arrival,
                                Event::new(t, j as u32, DELIVERY, k as u32),
                            );
                            break;
                        }
                        let target = link.target as usize;
                        e.synaptic_events += 1;
                        let w = match &syn.weights {
                            Some(weights) => jump * f64::from(weights[k]),
                            None => jump,
                        };
                        if apply_input(&mut e.membrane[target], arrival, w, net.drive_mv[target], p)
                        {
                            let ts = arrival.max(e.membrane[target].last);
                            e.spike(target, ts, b);
                        } else {
                            e.moved(target, b);
                        }
                        k += 1;
                    }
                }
                CROSSING => {
                    if ev.payload == e.version[j] && ev.time >= e.membrane[j].refractory_until {
                        e.spike(j, ev.time, b);
                    }
                }
                _ => {
                    if ev.time >= e.membrane[j].refractory_until {
                        let t = ev.time.max(e.membrane[j].last);
                        e.spike(j, t, b);
                    }
                }
            }
        }
        current.clear();
        // A bucket that swelled in a burst keeps at most 1 MiB of capacity.
        current.shrink_to(1 << 16);
        let now = (b + 1) as f64 * width;
        if now >= next_report {
            progress(now.min(duration_s));
            next_report += 1.0;
        }
    }
    let mut spikes = e.spikes;
    spikes.sort_by(|a, b| a.time_s.total_cmp(&b.time_s).then(a.neuron.cmp(&b.neuron)));
    Run {
        spikes,
        synaptic_events: e.synaptic_events,
    }
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
