//! Leaky integrate-and-fire dynamics with delta synapses, delays and short-term depression,
//! integrated event by event.
//!
//! Between events a neuron's potential (mV above rest) follows the exact solution
//! V(t) = D + (V0 - D) exp(-(t - t0) / tau_m) for its constant drive D; a synaptic arrival
//! adds its weight at once; a neuron whose drive is above threshold crosses it at the
//! analytic time t0 + tau_m ln((D - V0) / (D - theta)). Time is cut into buckets 0.1 ms wide
//! (at most the shortest delay). A spike's synapse row is sorted by delay, so each bucket
//! delivers, spike after spike in firing order, the stretch of each row whose arrivals fall
//! in it; no arrival is ever queued. Within one bucket arrivals are applied in that order,
//! each at its own time, so a spike triggered by an arrival is timed exactly unless an
//! earlier arrival in the same bucket came later in that order, when it may be up to one
//! bucket (0.1 ms) late. Threshold
//! crossings under the drive alone are always exact. The decay factor comes from a
//! table-driven exp within 2 ulp of `libm` ([`super::decay`]).
//!
//! Short-term depression follows Tsodyks & Markram 1997 (PNAS 94:719): each presynaptic
//! neuron has resources x in [0, 1] recovering as dx/dt = (1 - x) / tau_rec; a spike uses
//! U x of them, and its synapses deliver J U x.

use super::super::sample::exponential;
use super::culture::Synapses;
use super::decay::DecayTable;
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

/// Firing rate of one neuron alone (no synaptic input, no noise) under a constant drive
/// `drive_mv`, Hz: it is held at reset for the refractory period and then relaxes towards
/// the drive, reaching threshold after tau_m ln((D - V_reset) / (D - theta)), so the rate
/// is 1 / (t_ref + tau_m ln((D - V_reset) / (D - theta))) for D > theta and 0 otherwise
/// (the leaky integrate-and-fire rate; Gerstner et al. 2014, Neuronal Dynamics, ch. 1).
pub fn isolated_rate_hz(neuron: &NeuronParams, drive_mv: f64) -> f64 {
    let (d, theta, reset) = (drive_mv, neuron.threshold_mv, neuron.reset_mv);
    let period = neuron.refractory_s + neuron.tau_m_s * libm::log((d - reset) / (d - theta));
    // A drive at or under threshold (or reset), or NaN anywhere, never fires.
    if d > theta && d > reset && period > 0.0 {
        1.0 / period
    } else {
        0.0
    }
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
    /// When the run stopped early because it reached [`Network::most_spikes`], s.
    pub stopped_at_s: Option<f64>,
}

/// A spike whose synapse row is being delivered: each bucket takes the links whose arrival
/// falls in it, from `next` on (the row is sorted by delay). 24 bytes.
#[derive(Clone, Copy)]
struct Sending {
    /// Spike time, s.
    time: f64,
    /// The spike's jump, mV (times the synapse's weight when synapses are weighted).
    jump_mv: f64,
    /// Next link to deliver and the end of the row, as indices into the synapse table.
    next: u32,
    end: u32,
}

/// A scheduled spike of one neuron: a threshold crossing under its drive (valid while the
/// neuron's state version is `version`) or a spike imposed from outside.
#[derive(Clone, Copy)]
struct Event {
    time: f64,
    neuron: u32,
    /// State version for a crossing; [`FORCED`] for an imposed spike.
    version: u32,
}

const FORCED: u32 = u32::MAX;

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

/// The state every input touches, 32 bytes so that one input reads one half cache line.
#[derive(Clone, Copy)]
struct Membrane {
    /// Potential at `last`, mV above rest.
    v: f64,
    /// Time of the last update, s.
    last: f64,
    refractory_until: f64,
    /// Constant drive (R I), mV.
    drive: f64,
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
    /// The run stops (with [`Run::stopped_at_s`]) once it has fired more spikes than this:
    /// a bound on memory when a scenario fires far faster than expected.
    pub most_spikes: usize,
}

/// Buckets of `width` seconds in a ring spanning the longest delay: threshold crossings and
/// imposed spikes go into the ring when near and into a heap when further ahead. (Synaptic
/// arrivals are not queued: each bucket reads them from the rows of the spikes still
/// sending, see [`Sending`].)
struct Schedule {
    /// Buckets per second (1 / width).
    rate: f64,
    /// Ring length minus one; the ring length is a power of two.
    mask: u64,
    events: Vec<Vec<Event>>,
    far: BinaryHeap<Far>,
    /// Events that fall in the bucket being processed.
    due_now: Vec<Event>,
}

impl Schedule {
    #[inline]
    fn bucket_of(&self, t: f64) -> u64 {
        // Times are never negative, so truncation is the floor; they are also far below 2^63
        // buckets, so the signed conversion (cheaper than the unsigned one) is exact.
        (t * self.rate) as i64 as u64
    }

    /// Schedules `e` while bucket `now` is being processed (events never go before it).
    fn push_event(&mut self, now: u64, e: Event) {
        let ring = self.mask + 1;
        let b = self.bucket_of(e.time).max(now);
        if b == now {
            self.due_now.push(e);
        } else if b < now + ring - 1 {
            self.events[(b & self.mask) as usize].push(e);
        } else {
            self.far.push(Far(e));
        }
    }

    /// Moves heap events whose buckets have come within the ring's reach.
    fn pull_near(&mut self, now: u64) {
        let ring = self.mask + 1;
        while self
            .far
            .peek()
            .is_some_and(|f| self.bucket_of(f.0.time) < now + ring - 1)
        {
            if let Some(Far(e)) = self.far.pop() {
                let b = self.bucket_of(e.time).max(now);
                self.events[(b & self.mask) as usize].push(e);
            }
        }
    }
}

/// Mutable state of a run.
struct Engine<'a> {
    net: &'a Network<'a>,
    duration_s: f64,
    q: Schedule,
    membrane: Vec<Membrane>,
    resources: Vec<f64>,
    last_spike: Vec<f64>,
    version: Vec<u32>,
    spikes: Vec<Spike>,
    /// Spikes whose rows still have links to deliver, in the order they fired.
    sending: Vec<Sending>,
    synaptic_events: u64,
    decay: DecayTable,
}

impl Engine<'_> {
    /// An input moved the potential of neuron j, driven above threshold, without a spike: it
    /// now crosses at a new time.
    fn moved(&mut self, j: usize, b: u64) {
        let m = self.membrane[j];
        self.version[j] = self.version[j].wrapping_add(1) % FORCED;
        self.schedule_crossing(j, m.v, m.last, m.drive, b);
    }

    /// Schedules neuron j's next threshold crossing under its drive from `v` mV at `t0`, valid
    /// for its current state version (none if the drive never reaches threshold, or after the
    /// end of the run).
    fn schedule_crossing(&mut self, j: usize, v: f64, t0: f64, drive: f64, b: u64) {
        if let Some(t) = crossing_time(v, t0, drive, self.net.neuron) {
            if t < self.duration_s {
                self.q.push_event(
                    b,
                    Event {
                        time: t,
                        neuron: j as u32,
                        version: self.version[j],
                    },
                );
            }
        }
    }

    /// Applies an input of `weight` mV to neuron `j` at `t`, and fires it when it reaches
    /// threshold. Inlined into the loops over arrivals and noise kicks: the common case (a
    /// neuron below threshold whose drive cannot reach it) is a decay, an addition and a
    /// comparison.
    #[inline(always)]
    fn input(&mut self, j: usize, t: f64, weight: f64, b: u64) {
        let p = self.net.neuron;
        let Some(m) = self.membrane.get_mut(j) else {
            return;
        };
        if apply_input(m, t, weight, p, &self.decay) {
            let ts = t.max(m.last);
            self.spike(j, ts, b);
        } else if m.drive > p.threshold_mv {
            self.moved(j, b);
        }
    }

    /// Handles a crossing or imposed spike taken from the schedule.
    fn event(&mut self, ev: Event, b: u64) {
        let j = ev.neuron as usize;
        if ev.time >= self.duration_s || ev.time < self.membrane[j].refractory_until {
            return;
        }
        if ev.version == FORCED {
            let t = ev.time.max(self.membrane[j].last);
            self.spike(j, t, b);
        } else if ev.version == self.version[j] {
            self.spike(j, ev.time, b);
        }
    }

    /// Records a spike of neuron `j` at `t` while bucket `b` is processed: reset,
    /// refractoriness, depression, the drive's next crossing, and one arrival per synapse in
    /// the bucket of its time (the row is read once, front to back).
    fn spike(&mut self, j: usize, t: f64, b: u64) {
        let p = self.net.neuron;
        self.spikes.push(Spike {
            time_s: t,
            neuron: j as u32,
        });
        self.version[j] = self.version[j].wrapping_add(1) % FORCED;
        let m = &mut self.membrane[j];
        m.v = p.reset_mv;
        m.refractory_until = t + p.refractory_s;
        m.last = m.refractory_until;
        let (refractory_until, drive) = (m.refractory_until, m.drive);
        let syn = self.net.synapse;
        let efficacy = if syn.depression_u > 0.0 {
            let x = 1.0
                - (1.0 - self.resources[j])
                    * self
                        .decay
                        .exp_neg((t - self.last_spike[j]) / syn.recovery_s);
            let used = syn.depression_u * x;
            self.resources[j] = x - used;
            used
        } else {
            1.0
        };
        self.last_spike[j] = t;
        self.schedule_crossing(j, p.reset_mv, refractory_until, drive, b);
        let jump = if self.net.excitatory[j] {
            syn.excitatory_mv * efficacy
        } else {
            -syn.inhibitory_mv
        };
        let s = self.net.synapses;
        let (a, z) = (s.offsets[j] as usize, s.offsets[j + 1] as usize);
        let row = &s.links[a..z];
        // The row is sorted by delay: arrivals from `end` on fall after the run. Nearly every
        // row falls wholly inside it.
        let inside = |l: &super::culture::Link| t + f64::from(l.delay_s) < self.duration_s;
        let end = if row.last().is_none_or(inside) {
            row.len()
        } else {
            row.partition_point(inside)
        };
        self.synaptic_events += end as u64;
        if end > 0 {
            prefetch(row, 0);
            self.sending.push(Sending {
                time: t,
                jump_mv: jump,
                next: a as u32,
                end: (a + end) as u32,
            });
        }
    }

    /// Delivers, in the order the spikes fired, every arrival that falls in bucket `b` (the
    /// same order in which the arrivals would have been queued), and drops the spikes whose
    /// rows are done. Spikes fired meanwhile first deliver in the next bucket, because every
    /// delay is at least one bucket.
    fn deliver(&mut self, b: u64) {
        let s = self.net.synapses;
        // floor(time * rate) <= b exactly when time * rate < b + 1 (both in floating point).
        let (rate, next_bucket) = (self.q.rate, (b + 1) as f64);
        let count = self.sending.len();
        let mut kept = 0;
        for k in 0..count {
            let mut sending = self.sending[k];
            if let Some(ahead) = self.sending.get(k + PREFETCH_AHEAD) {
                prefetch(&s.links, ahead.next as usize);
            }
            while sending.next < sending.end {
                let at = sending.next as usize;
                let link = s.links[at];
                let time = sending.time + f64::from(link.delay_s);
                if time * rate >= next_bucket {
                    break;
                }
                if let Some(ahead) = s.links.get(at + PREFETCH_AHEAD) {
                    prefetch(&self.membrane, ahead.target as usize);
                }
                let weight_mv = match &s.weights {
                    None => sending.jump_mv as f32,
                    Some(w) => (sending.jump_mv * f64::from(w[at])) as f32,
                };
                self.input(link.target as usize, time, f64::from(weight_mv), b);
                sending.next += 1;
            }
            if sending.next < sending.end {
                self.sending[kept] = sending;
                kept += 1;
            }
        }
        // Spikes fired during this bucket were pushed after `count`: keep them, in order.
        self.sending.drain(kept..count);
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
    let syn = net.synapses;
    let (min_delay, max_delay) = syn.delay_range_s();
    let width = if min_delay.is_finite() {
        min_delay.min(1e-4)
    } else {
        1e-4
    };
    // The ring spans the longest delay; drive crossings further ahead wait in the heap.
    let ring = ((max_delay / width).ceil() as usize + 2).next_power_of_two();
    let mut e = Engine {
        net,
        duration_s,
        q: Schedule {
            rate: 1.0 / width,
            mask: ring as u64 - 1,
            events: vec![Vec::new(); ring],
            far: BinaryHeap::new(),
            due_now: Vec::new(),
        },
        membrane: net
            .drive_mv
            .iter()
            .map(|&drive| Membrane {
                v: 0.0,
                last: 0.0,
                refractory_until: f64::NEG_INFINITY,
                drive,
            })
            .collect(),
        resources: vec![1.0; n],
        last_spike: vec![f64::NEG_INFINITY; n],
        version: vec![0; n],
        spikes: Vec::new(),
        sending: Vec::new(),
        synaptic_events: 0,
        decay: DecayTable::new(),
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
    // The neuron of the next noise kick when it has been drawn ahead.
    let mut noise_target: Option<usize> = None;
    let mut next_noise = if noise_gap.is_finite() {
        exponential(rng, noise_gap)
    } else {
        f64::INFINITY
    };
    for j in 0..n {
        e.schedule_crossing(j, 0.0, 0.0, net.drive_mv[j], 0);
    }
    for &(j, t) in forced {
        e.q.push_event(
            0,
            Event {
                time: t,
                neuron: j,
                version: FORCED,
            },
        );
    }
    // Events pushed before the loop for bucket 0 wait in `due_now`; bucket 0 takes them.
    let total_buckets = e.q.bucket_of(duration_s) + 1;
    let mut next_report = 1.0;
    let mut events: Vec<Event> = Vec::new();
    let mut stopped_at_s = None;
    for b in 0..total_buckets {
        if e.spikes.len() > net.most_spikes {
            stopped_at_s = Some(b as f64 * width);
            break;
        }
        e.q.pull_near(b);
        let slot = (b & e.q.mask) as usize;
        std::mem::swap(&mut events, &mut e.q.events[slot]);
        let bucket_end = ((b + 1) as f64 * width).min(duration_s);
        while next_noise < bucket_end {
            let t = next_noise;
            let j = noise_target
                .take()
                .unwrap_or_else(|| rng.random_range(0..n));
            next_noise += exponential(rng, noise_gap);
            // The next kick's neuron is drawn now (the draws keep their order) so that its
            // membrane is on its way into cache; never past the run's end, where the generator
            // goes on to serve the recording.
            if next_noise < duration_s {
                let next = rng.random_range(0..n);
                prefetch(&e.membrane, next);
                noise_target = Some(next);
            }
            e.input(j, t, noise_mv, b);
        }
        for &ev in &events {
            e.event(ev, b);
        }
        e.deliver(b);
        // Crossings moved into this very bucket by the inputs above (and any they cause).
        while !e.q.due_now.is_empty() {
            let now: Vec<Event> = std::mem::take(&mut e.q.due_now);
            for ev in now {
                e.event(ev, b);
            }
        }
        events.clear();
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
        stopped_at_s,
    }
}

/// How many arrivals (or sending spikes) ahead the integrator asks for what it will read.
const PREFETCH_AHEAD: usize = 8;

/// Asks the processor to bring `items[i]` into cache (a hint: no effect on results, and
/// nothing on targets without a prefetch instruction).
#[inline(always)]
#[allow(unsafe_code)]
fn prefetch<T>(items: &[T], i: usize) {
    #[cfg(target_arch = "x86_64")]
    if let Some(item) = items.get(i) {
        // SAFETY: a prefetch reads nothing and cannot fault; the pointer is a valid element.
        unsafe {
            std::arch::x86_64::_mm_prefetch::<{ std::arch::x86_64::_MM_HINT_T0 }>(
                (item as *const T).cast::<i8>(),
            )
        };
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = (items, i);
}

/// Applies an input of `weight` mV at time `t`; returns whether the neuron reaches threshold.
#[inline(always)]
fn apply_input(
    s: &mut Membrane,
    t: f64,
    weight: f64,
    p: &NeuronParams,
    decay: &DecayTable,
) -> bool {
    if t < s.refractory_until {
        return false;
    }
    if t >= s.last {
        s.v = s.drive + (s.v - s.drive) * decay.exp_neg((t - s.last) / p.tau_m_s);
        s.last = t;
        s.v += weight;
    } else {
        // An earlier arrival handled after a later one in the same bucket: its jump has
        // decayed by now.
        s.v += weight * decay.exp_neg((s.last - t) / p.tau_m_s);
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
