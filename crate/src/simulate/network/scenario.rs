//! A network scenario from end to end: grow, wire, integrate, record, and work out the truth.

use super::culture::{
    graph_stats, place_neurons, sort_spatially, wire, CellGrid, Connectivity, GraphStats, Pattern,
};
use super::dynamics::{integrate, Network, NeuronParams, NoiseParams, Spike, SynapseParams};
use crate::detect::{detect_bursts, BurstSettings};
use crate::fronts::{fit_front, FrontPoints, FrontSettings};
use crate::import::{RoiSeries, SiteSpikes};
use crate::recording::Site;
use crate::simulate::fronts::{nominal_positions, ElectrodeLayout};
use crate::simulate::sample::{normal, uniform};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// Constant drive per neuron, mV: normal with this mean and SD, clipped at 0.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DriveParams {
    pub mean_mv: f64,
    pub sd_mv: f64,
    /// Isolated oscillators instead: each neuron's drive set so that alone (no synapses,
    /// no noise) it fires regularly at a rate drawn uniformly from this range, Hz (the
    /// leaky integrate-and-fire rate inverted; [`super::dynamics::isolated_rate_hz`]).
    /// `mean_mv` and `sd_mv` are then not used.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub isolated_rates_hz: Option<[f64; 2]>,
}

/// Virtual electrodes over the culture.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Electrodes {
    pub layout: ElectrodeLayout,
    /// Added to every electrode position, micrometres.
    #[serde(default)]
    pub offset_um: [f64; 2],
    /// An electrode hears neurons closer than this, micrometres.
    pub pickup_radius_um: f64,
    /// Chance that an electrode registers a spike of a neuron it hears.
    pub detection_probability: f64,
    /// Electrodes (counted from 0) that record nothing.
    #[serde(default)]
    pub dead: Vec<usize>,
    /// Spike times are rounded to this sampling rate, Hz.
    pub sampling_rate_hz: f64,
    /// Also write raw voltage at the sampling rate (`voltage.raw` + `voltage.json`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub voltage: Option<crate::simulate::voltage::VoltageOutput>,
}

/// Virtual calcium imaging.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Imaging {
    /// Number of ROIs, each over one neuron, spread over the culture.
    pub rois: usize,
    pub frame_rate_hz: f64,
    /// Decay time constant of a transient, s.
    pub decay_s: f64,
    /// Peak of one spike's transient, as a fraction of baseline (dF/F).
    pub amplitude: f64,
    /// Standard deviation of the measurement noise, dF/F.
    pub noise_sd: f64,
}

/// Everything that defines a network recording. Potentials in mV above rest, times in s.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NetworkScenario {
    pub name: String,
    pub seed: u64,
    pub duration_s: f64,
    pub pattern: Pattern,
    pub density_per_mm2: f64,
    #[serde(default = "default_excitatory")]
    pub excitatory_fraction: f64,
    pub connectivity: Connectivity,
    #[serde(default = "default_synaptic_delay")]
    pub synaptic_delay_s: f64,
    #[serde(default = "default_axon_speed")]
    pub axon_speed_mm_s: f64,
    pub neuron: NeuronParams,
    pub drive: DriveParams,
    pub noise: NoiseParams,
    pub synapse: SynapseParams,
    #[serde(default)]
    pub electrodes: Option<Electrodes>,
    #[serde(default)]
    pub imaging: Option<Imaging>,
    /// Graded synaptic block: every excitatory weight times this (1: none; 0: all blocked).
    #[serde(default = "one", skip_serializing_if = "is_one")]
    pub excitatory_scale: f64,
    /// Calcium, relative to the culture's own level (1). A model choice: the release
    /// probability of the depressing synapses (`synapse.depression_u`) is scaled by it
    /// (capped at 1), and every neuron's drive shifts by
    /// [`CALCIUM_DRIVE_MV`] x (calcium_scale - 1).
    #[serde(default = "one", skip_serializing_if = "is_one")]
    pub calcium_scale: f64,
    /// Field stimulation, written beside the recording as `stimuli.csv`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub stimulation: Option<super::stimulation::Stimulation>,
}

/// Drive shift per unit of relative calcium, mV (a model choice, see
/// [`NetworkScenario::calcium_scale`]).
pub const CALCIUM_DRIVE_MV: f64 = 0.5;

fn one() -> f64 {
    1.0
}
fn is_one(v: &f64) -> bool {
    *v == 1.0
}

fn default_excitatory() -> f64 {
    0.8
}
fn default_synaptic_delay() -> f64 {
    1e-3
}
fn default_axon_speed() -> f64 {
    300.0
}

/// The ground truth of one burst, from the first spikes of neurons across the culture.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NetworkTruthBurst {
    pub start_s: f64,
    pub end_s: f64,
    /// Neurons that fired in the burst.
    pub neurons_active: usize,
    /// Front fitted to the first spikes of about 200 neurons spread over the culture.
    pub model: Option<crate::fronts::FrontModel>,
    pub speed_mm_s: Option<f64>,
    pub origin_along_um: Option<f64>,
    pub origin_angle_deg: Option<f64>,
    pub origin_xy_um: Option<[f64; 2]>,
    pub direction_xy: Option<[f64; 2]>,
    pub rotation: Option<crate::fronts::RingTravel>,
    pub no_front_reason: Option<String>,
}

/// Ground truth and bookkeeping of a network run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NetworkTruth {
    pub model: String,
    pub scenario: NetworkScenario,
    pub neurons: usize,
    pub graph: GraphStats,
    pub spikes: usize,
    pub synaptic_events: u64,
    pub mean_rate_hz: f64,
    pub bursts: Vec<NetworkTruthBurst>,
    /// The neurons each electrode picks up, with each one's rate alone (no synapses, no
    /// noise; [`super::dynamics::isolated_rate_hz`]), in electrode order.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub electrode_neurons: Vec<SiteNeurons>,
    /// The same for each ROI (one neuron each).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub roi_neurons: Vec<SiteNeurons>,
    /// Field stimulation: thresholds and what each stimulus did.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub stimulation: Option<super::stimulation::StimulationTruth>,
    /// The giant component's share of the neurons when each excitatory synapse is kept with
    /// probability `excitatory_scale` (only when the scale is below 1; see
    /// [`super::stimulation::percolated_giant_fraction`]).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub block_giant_component_fraction: Option<f64>,
    /// What the run could not do as asked (for example fewer inputs per neuron than the
    /// target mean in-degree), in sentences.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub notices: Vec<String>,
}

/// The neurons behind one recorded site.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SiteNeurons {
    pub site: String,
    /// Each neuron's rate alone, Hz (0 for a neuron whose drive is under threshold).
    pub isolated_rates_hz: Vec<f64>,
}

/// What a network run gives.
#[derive(Debug, Clone, PartialEq)]
pub struct NetworkRecording {
    pub positions: Vec<[f64; 2]>,
    pub spikes: Vec<Spike>,
    /// Electrode sites and their spikes, when the scenario has electrodes.
    pub electrodes: Option<(Vec<Site>, Vec<SiteSpikes>)>,
    /// ROI sites, frame times and traces, when the scenario has imaging.
    pub imaging: Option<(Vec<Site>, Vec<f64>, Vec<RoiSeries>)>,
    /// The stimulus file (`stimuli.csv`), when the scenario stimulates.
    pub stimuli_csv: Option<String>,
    pub truth: NetworkTruth,
}

/// Longest culture time a network scenario may run, s (one day: a limit we chose, no source).
pub const MAX_NETWORK_DURATION_S: f64 = 86_400.0;
/// Most neurons a network scenario may grow.
pub const MAX_NEURONS: f64 = 2e6;
/// Most synapses a network scenario may wire.
pub const MAX_SYNAPSES: f64 = 1.2e8;
/// Most neuron pairs the wiring may consider (pairs within the footprint's cut-off).
pub const MAX_CANDIDATE_PAIRS: f64 = 2e9;
/// Most background kicks a run may draw (neurons x noise rate x duration).
pub const MAX_NOISE_KICKS: f64 = 2e9;
/// Most spikes a run may fire before it stops with an error (16 bytes each).
pub const MAX_NETWORK_SPIKES: usize = 200_000_000;
/// Most samples of written voltage (electrodes x sampling rate x duration).
pub const MAX_VOLTAGE_SAMPLES: f64 = 2e8;
/// Most values of imaging (ROIs x frames).
pub const MAX_IMAGING_VALUES: f64 = 2e8;
/// Shortest synaptic delay, s: the integrator's time step follows it (10 µs, a tenth of the
/// fastest synapses; common practice, no source).
pub const MIN_SYNAPTIC_DELAY_S: f64 = 1e-5;
/// Smallest footprint length, µm (a neuron's own body is about 10 µm; from memory).
pub const MIN_SIGMA_UM: f64 = 1.0;

/// Checks a scenario before anything runs: every number finite and physically meaningful,
/// and the work (neurons, candidate pairs, synapses, noise kicks, delays, samples) within
/// the limits above. The message names the field, its value and the limit.
pub fn check_network_scenario(s: &NetworkScenario) -> Result<(), String> {
    crate::simulate::require_positive(&[
        ("duration_s", s.duration_s),
        ("density_per_mm2", s.density_per_mm2),
        ("connectivity.sigma_um", s.connectivity.sigma_um),
        ("synaptic_delay_s", s.synaptic_delay_s),
        ("axon_speed_mm_s", s.axon_speed_mm_s),
        ("neuron.tau_m_s", s.neuron.tau_m_s),
        ("neuron.threshold_mv", s.neuron.threshold_mv),
        ("synapse.recovery_s", s.synapse.recovery_s),
    ])?;
    crate::simulate::require_non_negative(&[
        ("neuron.refractory_s", s.neuron.refractory_s),
        ("connectivity.mean_in_degree", s.connectivity.mean_in_degree),
        ("drive.sd_mv", s.drive.sd_mv),
        ("noise.rate_hz", s.noise.rate_hz),
        ("synapse.excitatory_mv", s.synapse.excitatory_mv),
        ("synapse.inhibitory_mv", s.synapse.inhibitory_mv),
    ])?;
    for (name, v) in [
        ("neuron.reset_mv", s.neuron.reset_mv),
        ("drive.mean_mv", s.drive.mean_mv),
        ("noise.amplitude_mv", s.noise.amplitude_mv),
    ] {
        if !v.is_finite() {
            return Err(format!(
                "{name}: expected a finite number, found {}",
                crate::place::number(v)
            ));
        }
    }
    if s.duration_s > MAX_NETWORK_DURATION_S {
        return Err(format!(
            "duration_s: expected at most {MAX_NETWORK_DURATION_S:.0} s (one day of culture time), found {}",
            crate::place::number(s.duration_s)
        ));
    }
    if !(MIN_SYNAPTIC_DELAY_S..=1.0).contains(&s.synaptic_delay_s) {
        return Err(format!(
            "synaptic_delay_s: expected {MIN_SYNAPTIC_DELAY_S} s to 1 s, found {}",
            crate::place::number(s.synaptic_delay_s)
        ));
    }
    if s.connectivity.sigma_um > crate::simulate::fronts::MAX_SIMULATED_EXTENT_UM {
        return Err(format!(
            "connectivity.sigma_um: expected at most {:.0} µm (1 m, beyond any dish), found {}",
            crate::simulate::fronts::MAX_SIMULATED_EXTENT_UM,
            crate::place::number(s.connectivity.sigma_um)
        ));
    }
    if s.connectivity.sigma_um < MIN_SIGMA_UM {
        return Err(format!(
            "connectivity.sigma_um: expected at least {MIN_SIGMA_UM} µm (a footprint smaller than a cell body), found {}",
            crate::place::number(s.connectivity.sigma_um)
        ));
    }
    if s.neuron.refractory_s > 1.0 || s.neuron.tau_m_s > 10.0 {
        return Err(format!(
            "neuron: expected refractory_s of at most 1 s and tau_m_s of at most 10 s, found {} and {}",
            crate::place::number(s.neuron.refractory_s), crate::place::number(s.neuron.tau_m_s)
        ));
    }
    if !(0.0..=1.0).contains(&s.synapse.depression_u) {
        return Err(format!(
            "synapse.depression_u: expected a fraction of 0 to 1, found {}",
            crate::place::number(s.synapse.depression_u)
        ));
    }
    if !(0.0..=1.0).contains(&s.excitatory_fraction) {
        return Err(format!(
            "excitatory_fraction: expected 0 to 1, found {}",
            crate::place::number(s.excitatory_fraction)
        ));
    }
    if s.neuron.reset_mv >= s.neuron.threshold_mv {
        return Err(format!(
            "neuron.reset_mv: expected a reset below neuron.threshold_mv, found {} and {} mV",
            crate::place::number(s.neuron.reset_mv),
            crate::place::number(s.neuron.threshold_mv)
        ));
    }
    s.pattern.check()?;
    let neurons = s.pattern.neuron_count(s.density_per_mm2);
    let sized_by = match s.pattern {
        super::culture::Pattern::Chain { .. } => s.pattern.size_fields().to_string(),
        _ => format!("density_per_mm2 x {}", s.pattern.size_fields()),
    };
    if neurons > MAX_NEURONS {
        return Err(format!(
            "{sized_by}: the pattern would hold {} neurons, more than the 2 million allowed",
            crate::place::number(neurons.round())
        ));
    }
    if neurons < 2.0 {
        return Err(format!(
            "{sized_by}: the pattern would hold {} neurons; a network needs at least 2",
            crate::place::number(neurons)
        ));
    }
    let synapses = neurons * s.connectivity.mean_in_degree;
    if synapses > MAX_SYNAPSES {
        return Err(format!(
            "connectivity.mean_in_degree: {} inputs for each of {neurons:.0} neurons would make {} synapses, more than the 120 million allowed",
            crate::place::number(s.connectivity.mean_in_degree),
            crate::place::number(synapses.round())
        ));
    }
    if s.connectivity.mean_in_degree > (neurons - 1.0).max(0.0) {
        return Err(format!(
            "connectivity.mean_in_degree: a neuron can have at most one input from each of the other {:.0} neurons, found {}",
            (neurons - 1.0).max(0.0),
            crate::place::number(s.connectivity.mean_in_degree)
        ));
    }
    let cutoff = s.connectivity.footprint.cutoff(s.connectivity.sigma_um);
    if cutoff.is_finite() {
        let pairs = neurons * s.pattern.neighbours_within(s.density_per_mm2, cutoff);
        if pairs > MAX_CANDIDATE_PAIRS {
            return Err(format!(
                "connectivity.sigma_um: a footprint of {} µm reaches about {pairs:.3e} neuron pairs, more than the limit of {MAX_CANDIDATE_PAIRS:.0}; give a shorter footprint or fewer neurons",
                s.connectivity.sigma_um
            ));
        }
        if s.connectivity.weighted && pairs > MAX_SYNAPSES {
            return Err(format!(
                "connectivity.weighted: connecting every pair within the cut-off would make about {pairs:.0} synapses, more than the 120 million allowed"
            ));
        }
    }
    // The integrator's event ring spans the longest delay in steps of the shortest (at most
    // 0.1 ms); the longest is the synaptic delay plus the axon's time over the cut-off (or
    // over the whole pattern when the footprint has none).
    let (lo, hi) = s.pattern.bounding_box_um();
    let span_um = libm::hypot(hi[0] - lo[0], hi[1] - lo[1]);
    let longest_s = s.synaptic_delay_s + cutoff.min(span_um) / (s.axon_speed_mm_s * 1e3);
    let steps = longest_s / s.synaptic_delay_s.min(1e-4);
    if steps > 4_194_304.0 || steps.is_nan() {
        return Err(format!(
            "axon_speed_mm_s: at {} mm/s the longest delay would be {longest_s:.3e} s, more than 4194304 steps of the integrator; give a faster axon",
            s.axon_speed_mm_s
        ));
    }
    let kicks = neurons * s.noise.rate_hz * s.duration_s;
    if kicks > MAX_NOISE_KICKS {
        return Err(format!(
            "noise.rate_hz: {} Hz on {neurons:.0} neurons for {} s is {kicks:.3e} kicks, more than the limit of {MAX_NOISE_KICKS:.0}",
            crate::place::number(s.noise.rate_hz),
            crate::place::number(s.duration_s)
        ));
    }
    if let Some(e) = &s.electrodes {
        check_electrodes(e, s.duration_s)?;
    }
    if !(s.excitatory_scale.is_finite() && (0.0..=1.0).contains(&s.excitatory_scale)) {
        return Err(format!(
            "excitatory_scale: expected 0 (all blocked) to 1 (none), found {}",
            crate::place::number(s.excitatory_scale)
        ));
    }
    if !(s.calcium_scale.is_finite() && s.calcium_scale > 0.0 && s.calcium_scale <= 10.0) {
        return Err(format!(
            "calcium_scale: expected a level above 0 and at most 10 (1 is the culture's own), found {}",
            crate::place::number(s.calcium_scale)
        ));
    }
    if let Some([lo, hi]) = s.drive.isolated_rates_hz {
        let most = 1.0 / s.neuron.refractory_s.max(1e-9);
        if !(lo.is_finite() && hi.is_finite() && lo > 0.0 && lo <= hi && hi < most) {
            return Err(format!(
                "drive.isolated_rates_hz: expected a range 0 < low <= high below 1 / refractory ({most:.0} Hz), found [{lo}, {hi}]"
            ));
        }
        // A slow rate puts the drive within threshold x e^-(period / tau_m) of the threshold;
        // past e^-30 that gap is lost in rounding (and any noise sets the rate instead).
        let periods = (1.0 / lo - s.neuron.refractory_s) / s.neuron.tau_m_s;
        if periods > 30.0 {
            return Err(format!(
                "drive.isolated_rates_hz: a neuron with tau_m_s {} cannot fire as slowly as {lo} Hz on a constant drive (its drive would sit within rounding of the threshold); give tau_m_s of at least {:.3} s or a faster lowest rate",
                s.neuron.tau_m_s,
                (1.0 / lo - s.neuron.refractory_s) / 30.0
            ));
        }
    }
    if let Some(st) = &s.stimulation {
        st.check(s.duration_s, neurons)?;
    }
    if let Some(i) = &s.imaging {
        check_imaging(i, s.duration_s, neurons)?;
    }
    Ok(())
}

/// The electrodes' part of [`check_network_scenario`].
fn check_electrodes(e: &Electrodes, duration_s: f64) -> Result<(), String> {
    use crate::simulate::fronts::MAX_SIMULATED_EXTENT_UM;
    e.layout.check("electrodes.layout")?;
    crate::simulate::fronts::check_sampling_rate(
        "electrodes.sampling_rate_hz",
        e.sampling_rate_hz,
    )?;
    if !(0.0..=1.0).contains(&e.detection_probability) {
        return Err(format!(
            "electrodes.detection_probability: expected 0 to 1, found {}",
            crate::place::number(e.detection_probability)
        ));
    }
    if !(e.pickup_radius_um.is_finite()
        && e.pickup_radius_um > 0.0
        && e.pickup_radius_um <= MAX_SIMULATED_EXTENT_UM)
    {
        return Err(format!(
            "electrodes.pickup_radius_um: expected a length above 0 µm and at most {MAX_SIMULATED_EXTENT_UM:.0} µm, found {}",
            crate::place::number(e.pickup_radius_um)
        ));
    }
    if !e
        .offset_um
        .iter()
        .all(|v| v.is_finite() && v.abs() <= MAX_SIMULATED_EXTENT_UM)
    {
        return Err(format!(
            "electrodes.offset_um: expected a shift within {MAX_SIMULATED_EXTENT_UM:.0} µm, found ({}, {})",
            e.offset_um[0], e.offset_um[1]
        ));
    }
    let count = e.layout.count();
    if let Some(&bad) = e.dead.iter().find(|&&i| i >= count) {
        return Err(format!(
            "electrodes.dead: electrode {bad} does not exist (there are {count}, counted from 0)"
        ));
    }
    if let Some(v) = &e.voltage {
        crate::simulate::require_non_negative(&[
            ("electrodes.voltage.noise_uv", v.noise_uv),
            ("electrodes.voltage.spike_uv", v.spike_uv),
        ])?;
        crate::simulate::require_positive(&[("electrodes.voltage.scale_uv", v.scale_uv)])?;
        let samples = count as f64 * e.sampling_rate_hz * duration_s;
        if samples > MAX_VOLTAGE_SAMPLES {
            return Err(format!(
                "electrodes.voltage: {count} electrodes at {} Hz for {duration_s} s is {samples:.3e} samples, more than the limit of {MAX_VOLTAGE_SAMPLES:.0}; shorten the run or write spikes only",
                crate::place::number(e.sampling_rate_hz)
            ));
        }
    }
    Ok(())
}

/// The imaging part of [`check_network_scenario`].
fn check_imaging(i: &Imaging, duration_s: f64, neurons: f64) -> Result<(), String> {
    crate::simulate::require_positive(&[
        ("imaging.frame_rate_hz", i.frame_rate_hz),
        ("imaging.decay_s", i.decay_s),
    ])?;
    if !(i.noise_sd.is_finite() && i.noise_sd >= 0.0 && i.amplitude.is_finite()) {
        return Err(format!(
            "imaging: expected a finite amplitude and a noise_sd of 0 or more, found {} and {}",
            crate::place::number(i.amplitude),
            crate::place::number(i.noise_sd)
        ));
    }
    if i.rois == 0 || i.rois as f64 > neurons {
        return Err(format!(
            "imaging.rois: expected 1 to {neurons:.0} ROIs (one neuron each), found {}",
            i.rois
        ));
    }
    let values = i.rois as f64 * i.frame_rate_hz * duration_s;
    if values > MAX_IMAGING_VALUES {
        return Err(format!(
            "imaging.rois x imaging.frame_rate_hz x duration_s: {} ROIs at {} frames/s for {duration_s} s is {values:.3e} values, more than the limit of {MAX_IMAGING_VALUES:.0}; give fewer ROIs or frames",
            i.rois, crate::place::number(i.frame_rate_hz)
        ));
    }
    Ok(())
}

/// Runs a network scenario. `progress(stage, done, total)` reports the integration in
/// simulated seconds. The same scenario gives the same recording on every platform.
pub fn simulate_network(
    s: &NetworkScenario,
    progress: &mut dyn FnMut(&str, f64, f64),
) -> Result<NetworkRecording, String> {
    check_network_scenario(s)?;
    let Grown {
        positions,
        excitatory,
        drive,
        mut rng,
    } = grow(s)?;
    let n = positions.len();
    progress("wiring", 0.0, 1.0);
    let synapses = wire(
        &positions,
        &s.connectivity,
        s.synaptic_delay_s,
        s.axon_speed_mm_s * 1e3,
        &mut rng,
    );
    let graph = graph_stats(n, &synapses);
    let mut notices = Vec::new();
    if let Some(notice) = in_degree_shortfall(s, graph.mean_in_degree) {
        notices.push(notice);
    }
    let block_giant_component_fraction = (s.excitatory_scale < 1.0).then(|| {
        super::stimulation::percolated_giant_fraction(
            &synapses,
            &excitatory,
            s.excitatory_scale,
            s.seed,
        )
    });
    let mut synapse = s.synapse.clone();
    synapse.excitatory_mv *= s.excitatory_scale;
    synapse.depression_u = (synapse.depression_u * s.calcium_scale).min(1.0);
    let net = Network {
        synapses: &synapses,
        excitatory: &excitatory,
        drive_mv: &drive,
        neuron: &s.neuron,
        synapse: &synapse,
        noise: &s.noise,
        most_spikes: MAX_NETWORK_SPIKES,
    };
    let duration = s.duration_s;
    let stimulated = s.stimulation.as_ref().map(|st| {
        let protocol = st.protocol(s.seed);
        let thresholds = st.thresholds(n, s.seed);
        (st, protocol, thresholds)
    });
    let forced = stimulated
        .as_ref()
        .map(|(st, protocol, thresholds)| st.forced_spikes(thresholds, protocol))
        .unwrap_or_default();
    let run = integrate(&net, duration, &forced, &mut rng, &mut |t| {
        progress("integrating", t, duration)
    });
    drop(forced);
    drop(synapses);
    if let Some(t) = run.stopped_at_s {
        return Err(format!(
            "the network fired more than {MAX_NETWORK_SPIKES} spikes by {t:.1} s of the {duration} s asked for, more than can be kept; shorten duration_s, or weaken the drive, noise or coupling"
        ));
    }

    let mut trains: Vec<Vec<f64>> = vec![Vec::new(); n];
    for sp in &run.spikes {
        trains[sp.neuron as usize].push(sp.time_s);
    }
    let bursts = truth_bursts(s, &positions, &trains);
    let alone = |members: &[usize]| -> Vec<f64> {
        members
            .iter()
            .map(|&i| super::dynamics::isolated_rate_hz(&s.neuron, drive[i]))
            .collect()
    };
    let mut electrode_neurons = Vec::new();
    let mut electrode_members: Vec<Vec<usize>> = Vec::new();
    let electrodes = s.electrodes.as_ref().map(|e| {
        let (sites, spikes, members) = record_electrodes(e, &positions, &trains, &mut rng);
        electrode_members = members.clone();
        electrode_neurons = sites
            .iter()
            .zip(&members)
            .map(|(site, m)| SiteNeurons {
                site: site.id.clone(),
                isolated_rates_hz: alone(m),
            })
            .collect();
        (sites, spikes)
    });
    let mut roi_neurons = Vec::new();
    let mut roi_members: Vec<usize> = Vec::new();
    let imaging = s.imaging.as_ref().map(|i| {
        let (sites, time_s, series, members) =
            record_imaging(i, duration, &positions, &trains, &mut rng);
        roi_members = members.clone();
        roi_neurons = sites
            .iter()
            .zip(&members)
            .map(|(site, &m)| SiteNeurons {
                site: site.id.clone(),
                isolated_rates_hz: alone(&[m]),
            })
            .collect();
        (sites, time_s, series)
    });
    // The response window of the stimulation truth: the analysis's default (200 ms).
    let window_s = crate::response::ResponseSettings::default().window_ms / 1000.0;
    let stimulation = stimulated.as_ref().map(|(st, protocol, thresholds)| {
        super::stimulation::StimulationTruth {
            unit: st.unit,
            threshold_mean: st.threshold_mean,
            threshold_sd: st.threshold_sd,
            window_s,
            stimuli: super::stimulation::stimulus_truth(thresholds, protocol, &trains, window_s),
            electrode_thresholds: electrode_members
                .iter()
                .map(|m| m.iter().map(|&i| thresholds[i]).collect())
                .collect(),
            roi_thresholds: roi_members.iter().map(|&i| thresholds[i]).collect(),
        }
    });
    let stimuli_csv = stimulated
        .as_ref()
        .map(|(st, protocol, _)| st.protocol_csv(protocol));
    let spikes = run.spikes.len();
    Ok(NetworkRecording {
        positions,
        spikes: run.spikes,
        electrodes,
        imaging,
        stimuli_csv,
        truth: NetworkTruth {
            model: "network".into(),
            scenario: s.clone(),
            neurons: n,
            graph,
            spikes,
            synaptic_events: run.synaptic_events,
            mean_rate_hz: spikes as f64 / n as f64 / duration,
            bursts,
            electrode_neurons,
            roi_neurons,
            stimulation,
            block_giant_component_fraction,
            notices,
        },
    })
}

/// A sentence when the wiring made clearly fewer inputs per neuron than asked for: the
/// footprint reaches too few neighbours to give every neuron `mean_in_degree` inputs (the
/// connection probability is capped at 1). `None` within 10% of the target.
pub fn in_degree_shortfall(s: &NetworkScenario, realised: f64) -> Option<String> {
    let target = s.connectivity.mean_in_degree;
    if s.connectivity.weighted || target < 1.0 || realised >= 0.9 * target {
        return None;
    }
    let cutoff = s.connectivity.footprint.cutoff(s.connectivity.sigma_um);
    let near = s.pattern.neighbours_within(s.density_per_mm2, cutoff);
    Some(format!(
        "the wiring made a mean in-degree of {realised:.1}, not the {target} asked for: within the footprint's reach ({cutoff:.0} µm) a neuron has about {near:.0} neighbours, and each is connected with probability at most 1; widen connectivity.sigma_um or raise the density to reach {target}"
    ))
}

/// A culture before wiring, and the generator as wiring finds it.
struct Grown {
    positions: Vec<[f64; 2]>,
    excitatory: Vec<bool>,
    drive: Vec<f64>,
    rng: ChaCha8Rng,
}

/// Places the scenario's neurons (in spatial order) and draws their type and drive.
fn grow(s: &NetworkScenario) -> Result<Grown, String> {
    let mut rng = ChaCha8Rng::seed_from_u64(s.seed);
    let count = (s.density_per_mm2 * s.pattern.area_mm2()).round() as usize;
    let mut positions = place_neurons(&s.pattern, count, &mut rng);
    sort_spatially(&mut positions, s.connectivity.sigma_um);
    let n = positions.len();
    if n < 2 {
        return Err("the pattern holds fewer than two neurons at this density".into());
    }
    let excitatory: Vec<bool> = (0..n)
        .map(|_| uniform(&mut rng) < s.excitatory_fraction)
        .collect();
    let shift = CALCIUM_DRIVE_MV * (s.calcium_scale - 1.0);
    let drive: Vec<f64> = match s.drive.isolated_rates_hz {
        Some([lo, hi]) => (0..n)
            .map(|_| oscillator_drive_mv(&s.neuron, lo + (hi - lo) * uniform(&mut rng)) + shift)
            .collect(),
        None => (0..n)
            .map(|_| (s.drive.mean_mv + s.drive.sd_mv * normal(&mut rng)).max(0.0) + shift)
            .collect(),
    };
    Ok(Grown {
        positions,
        excitatory,
        drive,
        rng,
    })
}

/// The constant drive under which a neuron alone fires regularly at `rate_hz`, mV: the
/// leaky integrate-and-fire period T = t_ref + tau ln((D - V_reset) / (D - theta)) solved
/// for D, D = (theta e^x - V_reset) / (e^x - 1) with x = (T - t_ref) / tau (Gerstner et al.
/// 2014, Neuronal Dynamics, ch. 1). The rate must be below 1 / t_ref.
pub fn oscillator_drive_mv(neuron: &super::dynamics::NeuronParams, rate_hz: f64) -> f64 {
    let x = (1.0 / rate_hz - neuron.refractory_s) / neuron.tau_m_s;
    let e = x.exp();
    (neuron.threshold_mv * e - neuron.reset_mv) / (e - 1.0)
}

/// The wiring of one culture at one target mean in-degree.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InDegreePoint {
    /// The mean in-degree asked for (K).
    pub target_in_degree: f64,
    pub graph: GraphStats,
}

/// The scenario's culture (the same neurons as in its simulation) wired at each target mean
/// in-degree in turn, with its graph statistics: how connectivity and the giant component grow
/// with K. Each wiring starts from the generator state the simulation's wiring starts from,
/// so the point at the scenario's own K is the simulated network. `progress` gets the number
/// of wirings done.
pub fn in_degree_sweep(
    s: &NetworkScenario,
    in_degrees: &[f64],
    progress: &mut dyn FnMut(usize, usize),
) -> Result<Vec<InDegreePoint>, String> {
    if in_degrees.is_empty() {
        return Err("in-degree sweep: expected at least one mean in-degree".into());
    }
    for &k in in_degrees {
        if !(k.is_finite() && k >= 0.0) {
            return Err(format!(
                "in-degree sweep: expected mean in-degrees of 0 or more, found {k}"
            ));
        }
        let mut at_k = s.clone();
        at_k.connectivity.mean_in_degree = k;
        check_network_scenario(&at_k).map_err(|e| format!("in-degree sweep at K = {k}: {e}"))?;
    }
    let grown = grow(s)?;
    let n = grown.positions.len();
    let mut points = Vec::with_capacity(in_degrees.len());
    for (done, &k) in in_degrees.iter().enumerate() {
        progress(done, in_degrees.len());
        let connectivity = Connectivity {
            mean_in_degree: k,
            ..s.connectivity.clone()
        };
        let synapses = wire(
            &grown.positions,
            &connectivity,
            s.synaptic_delay_s,
            s.axon_speed_mm_s * 1e3,
            &mut grown.rng.clone(),
        );
        points.push(InDegreePoint {
            target_in_degree: k,
            graph: graph_stats(n, &synapses),
        });
    }
    progress(in_degrees.len(), in_degrees.len());
    Ok(points)
}

impl InDegreePoint {
    /// One line for the figure's read-out.
    pub fn describe(&self) -> String {
        let g = &self.graph;
        format!(
            "K = {}: giant component {:.3} of {} neurons, {} components, mean in-degree {:.2}",
            self.target_in_degree,
            g.giant_component_fraction,
            g.neurons,
            g.components,
            g.mean_in_degree
        )
    }
}

/// An in-degree sweep as CSV, one row per target mean in-degree.
pub fn in_degree_sweep_csv(points: &[InDegreePoint]) -> String {
    let mut out = crate::csv_out::CsvOut::new([
        "target_in_degree",
        "neurons",
        "synapses",
        "mean_in_degree",
        "components",
        "giant_component_fraction",
    ]);
    for p in points {
        let g = &p.graph;
        out.row([
            p.target_in_degree.to_string(),
            g.neurons.to_string(),
            g.synapses.to_string(),
            format!("{:.6}", g.mean_in_degree),
            g.components.to_string(),
            format!("{:.6}", g.giant_component_fraction),
        ]);
    }
    out.finish()
}

/// Neurons (the neuron itself included) whose earliest first spike times a sampled neuron in
/// the ground truth: common practice, no source (a median of 9 outvotes up to 4 stray spikes).
const TRUTH_NEIGHBOURS: usize = 9;

/// Bursts of the whole population and the front of each, fitted to the activation times of
/// about 200 neurons spread over the culture: each the earliest first spike of the neuron
/// and its [`TRUTH_NEIGHBOURS`] - 1 nearest neighbours.
fn truth_bursts(
    s: &NetworkScenario,
    positions: &[[f64; 2]],
    trains: &[Vec<f64>],
) -> Vec<NetworkTruthBurst> {
    let track = s.pattern.track();
    let settings = BurstSettings::default();
    let bursts = detect_bursts(trains, &settings).bursts;
    let stride = (positions.len() / 200).max(1);
    let sample: Vec<usize> = (0..positions.len()).step_by(stride).collect();
    // Each place is timed as an electrode times it: by the first of the neurons there to
    // fire (the sampled neuron and its nearest neighbours). The median of the neighbourhood,
    // used before, lags the arrival by half the front's rise, which grows as the front
    // forms, and made the truth about 1% faster than electrodes could see (ring and dish
    // demos: 95% intervals held it for 72% and 59% of fronts; 93% and 97% now). A lone
    // spontaneous spike just before a front (about 1 neuron in 200 in a dish) then times
    // its place early; the robust fit and model choice set it aside.
    let grid = CellGrid::holding(positions, TRUTH_NEIGHBOURS);
    let neighbours: Vec<Vec<usize>> = sample
        .iter()
        .map(|&i| grid.nearest(positions, positions[i], TRUTH_NEIGHBOURS))
        .collect();
    let front_settings = FrontSettings {
        resamples: 200,
        min_sites: 8,
        ..FrontSettings::default()
    };
    bursts
        .iter()
        .enumerate()
        .map(|(k, b)| {
            let mut points = FrontPoints {
                site: Vec::new(),
                along_um: Vec::new(),
                angle_rad: Vec::new(),
                xy_um: Vec::new(),
                t_s: Vec::new(),
            };
            let first_spike = |i: usize| -> Option<f64> {
                let t = &trains[i];
                let a = t.partition_point(|&x| x < b.start_s - 0.05);
                t.get(a).copied().filter(|&x| x <= b.end_s)
            };
            for (&i, near) in sample.iter().zip(&neighbours) {
                let firsts: Vec<f64> = near.iter().filter_map(|&j| first_spike(j)).collect();
                // Active when most of its neighbourhood is.
                if 2 * firsts.len() <= near.len() {
                    continue;
                }
                let first = firsts.iter().copied().fold(f64::INFINITY, f64::min);
                {
                    let p = positions[i];
                    points.site.push(i);
                    points
                        .along_um
                        .push(track.project(p).map_or(0.0, |q| q.along_um));
                    points
                        .angle_rad
                        .push(crate::fronts::ring_angle_of(&track, p));
                    points.xy_um.push(p);
                    points.t_s.push(first);
                }
            }
            let fit = fit_front(
                &points,
                &track,
                &front_settings,
                s.seed.wrapping_add(k as u64),
                Some(1e-6),
            );
            let (model, speed, origin, direction, rotation, reason) = match fit {
                Ok(f) => (
                    Some(f.model),
                    Some(f.speed_mm_s),
                    Some(f.origin),
                    f.direction_xy,
                    f.rotation,
                    None,
                ),
                Err(r) => (None, None, None, None, None, Some(r.reason)),
            };
            let (origin_along_um, origin_angle_deg, origin_xy_um) =
                origin.map_or((None, None, None), |o| o.parts());
            NetworkTruthBurst {
                start_s: b.start_s,
                end_s: b.end_s,
                neurons_active: b.sites.len(),
                model,
                speed_mm_s: speed,
                origin_along_um,
                origin_angle_deg,
                origin_xy_um,
                direction_xy: direction,
                rotation,
                no_front_reason: reason,
            }
        })
        .collect()
}

fn electrode_positions(layout: &ElectrodeLayout, offset: [f64; 2]) -> Vec<[f64; 2]> {
    nominal_positions(layout)
        .iter()
        .map(|p| [p[0] + offset[0], p[1] + offset[1]])
        .collect()
}

fn record_electrodes(
    e: &Electrodes,
    positions: &[[f64; 2]],
    trains: &[Vec<f64>],
    rng: &mut ChaCha8Rng,
) -> (Vec<Site>, Vec<SiteSpikes>, Vec<Vec<usize>>) {
    let at = electrode_positions(&e.layout, e.offset_um);
    let mut members = Vec::with_capacity(at.len());
    let fs = e.sampling_rate_hz;
    let mut sites = Vec::with_capacity(at.len());
    let mut spikes = Vec::with_capacity(at.len());
    for (k, p) in at.iter().enumerate() {
        let id = format!("e{:02}", k + 1);
        sites.push(Site {
            id: id.clone(),
            x_um: p[0],
            y_um: p[1],
        });
        let mut times = Vec::new();
        let mut picked = Vec::new();
        if !e.dead.contains(&k) {
            for (i, q) in positions.iter().enumerate() {
                if libm::hypot(q[0] - p[0], q[1] - p[1]) <= e.pickup_radius_um {
                    picked.push(i);
                    for &t in &trains[i] {
                        if uniform(rng) < e.detection_probability {
                            times.push((t * fs).round() / fs);
                        }
                    }
                }
            }
        }
        times.sort_by(f64::total_cmp);
        times.dedup();
        spikes.push(SiteSpikes {
            site: id,
            times_s: times,
        });
        members.push(picked);
    }
    (sites, spikes, members)
}

fn record_imaging(
    im: &Imaging,
    duration: f64,
    positions: &[[f64; 2]],
    trains: &[Vec<f64>],
    rng: &mut ChaCha8Rng,
) -> (Vec<Site>, Vec<f64>, Vec<RoiSeries>, Vec<usize>) {
    let n = positions.len();
    let rois = im.rois.min(n).max(1);
    let stride = (n / rois).max(1);
    let frames = (duration * im.frame_rate_hz).floor() as usize;
    let time_s: Vec<f64> = (0..frames).map(|k| k as f64 / im.frame_rate_hz).collect();
    let mut sites = Vec::with_capacity(rois);
    let mut series = Vec::with_capacity(rois);
    let mut members = Vec::with_capacity(rois);
    for r in 0..rois {
        let i = r * stride;
        members.push(i);
        let id = format!("r{:03}", r + 1);
        sites.push(Site {
            id: id.clone(),
            x_um: positions[i][0],
            y_um: positions[i][1],
        });
        let mut values = vec![0.0f64; frames];
        // Sum of decaying transients, evaluated frame by frame with one running sum.
        let decay = libm::exp(-1.0 / (im.frame_rate_hz * im.decay_s));
        let mut level = 0.0;
        let mut next = 0;
        let spikes = &trains[i];
        for (k, t) in time_s.iter().enumerate() {
            level *= if k > 0 { decay } else { 1.0 };
            while next < spikes.len() && spikes[next] <= *t {
                level += im.amplitude * libm::exp(-(t - spikes[next]) / im.decay_s);
                next += 1;
            }
            values[k] = 1.0 + level + im.noise_sd * normal(rng);
        }
        series.push(RoiSeries { roi: id, values });
    }
    (sites, time_s, series, members)
}

/// The shape of a culture built from options.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum CultureShape {
    /// A straight strip; electrodes in a row along its middle.
    Strip,
    /// A ring annulus; electrodes on its mid-circle.
    Ring,
    /// A square dish; electrodes in a square grid.
    Dish,
    /// A round dish; electrodes in a square grid inside it.
    Disk,
}

/// Culture time simulated when the options give none, s.
pub const CULTURE_DURATION_S: f64 = 60.0;
/// Seed used when the options give none.
pub const CULTURE_SEED: u64 = 1;

fn culture_duration() -> f64 {
    CULTURE_DURATION_S
}
fn culture_seed() -> u64 {
    CULTURE_SEED
}

/// A network culture described by a few numbers (`ringline simulate` without a scenario
/// file, and the page's simulator). What is left `None` takes the shape's default; neuron,
/// synapse, drive and noise parameters are those of the demo cultures. Lengths in
/// micrometres.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CultureOptions {
    pub shape: CultureShape,
    /// Strip length (default 6,000) or dish side (default 2,000).
    #[serde(default)]
    pub length_um: Option<f64>,
    /// Strip or ring width (default 300).
    #[serde(default)]
    pub width_um: Option<f64>,
    /// Ring mid-radius (default 1,500) or round dish radius (default 1,000).
    #[serde(default)]
    pub radius_um: Option<f64>,
    /// Neurons per mm^2 (default 1,500).
    #[serde(default)]
    pub density_per_mm2: Option<f64>,
    /// Mean inputs per neuron (default 100).
    #[serde(default)]
    pub mean_in_degree: Option<f64>,
    /// Gaussian footprint length (default 150).
    #[serde(default)]
    pub sigma_um: Option<f64>,
    /// Electrodes: a row (strip), a circle (ring) or a square grid (dish, disk; must be a
    /// square number). Default 16, 24, 64 and 64; 0 for none.
    #[serde(default)]
    pub electrodes: Option<usize>,
    /// ROIs of virtual calcium imaging at 20 frames/s (default 0: no imaging).
    #[serde(default)]
    pub rois: usize,
    #[serde(default = "culture_duration")]
    pub duration_s: f64,
    #[serde(default = "culture_seed")]
    pub seed: u64,
}

/// Builds the scenario that [`CultureOptions`] describe; the message names the option.
pub fn scenario_from_options(o: &CultureOptions) -> Result<NetworkScenario, String> {
    let positive = |name: &str, v: Option<f64>, default: f64| -> Result<f64, String> {
        let v = v.unwrap_or(default);
        if v.is_finite() && v > 0.0 {
            Ok(v)
        } else {
            Err(format!(
                "--{name}: expected a number above 0, found {}",
                crate::place::number(v)
            ))
        }
    };
    let length = positive(
        "length-um",
        o.length_um,
        if o.shape == CultureShape::Strip {
            6000.0
        } else {
            2000.0
        },
    )?;
    let width = positive("width-um", o.width_um, 300.0)?;
    let radius = positive(
        "radius-um",
        o.radius_um,
        if o.shape == CultureShape::Ring {
            1500.0
        } else {
            1000.0
        },
    )?;
    let count = o.electrodes.unwrap_or(match o.shape {
        CultureShape::Strip => 16,
        CultureShape::Ring => 24,
        CultureShape::Dish | CultureShape::Disk => 64,
    });
    let grid = |side_um: f64, corner: [f64; 2]| -> Result<(ElectrodeLayout, [f64; 2]), String> {
        let rows = (count as f64).sqrt().round() as usize;
        if rows * rows != count {
            return Err(format!(
                "--electrodes: a dish takes a square grid (16, 36, 64, ...), found {count}"
            ));
        }
        let pitch = side_um / rows as f64;
        Ok((
            ElectrodeLayout::Grid {
                rows,
                columns: rows,
                pitch_um: pitch,
            },
            [corner[0] + pitch / 2.0, corner[1] + pitch / 2.0],
        ))
    };
    let (pattern, layout) = match o.shape {
        CultureShape::Strip => (
            Pattern::Strip {
                length_um: length,
                width_um: width,
            },
            (
                ElectrodeLayout::Row {
                    count,
                    pitch_um: length / count.max(1) as f64,
                    angle_deg: 0.0,
                },
                [length / count.max(1) as f64 / 2.0, 0.0],
            ),
        ),
        CultureShape::Ring => (
            Pattern::Annulus {
                radius_um: radius,
                width_um: width,
            },
            (
                ElectrodeLayout::Circle {
                    count,
                    radius_um: radius,
                },
                [0.0, 0.0],
            ),
        ),
        CultureShape::Dish => (
            Pattern::Rectangle {
                width_um: length,
                height_um: length,
            },
            grid(length, [0.0, 0.0])?,
        ),
        CultureShape::Disk => {
            // The largest square inside the disk.
            let side = radius * std::f64::consts::SQRT_2;
            (
                Pattern::Disk { radius_um: radius },
                grid(side, [-side / 2.0, -side / 2.0])?,
            )
        }
    };
    let shape_name = match o.shape {
        CultureShape::Strip => "strip",
        CultureShape::Ring => "ring",
        CultureShape::Dish => "dish",
        CultureShape::Disk => "disk",
    };
    let s = NetworkScenario {
        name: format!("{shape_name}-culture"),
        seed: o.seed,
        duration_s: o.duration_s,
        pattern,
        density_per_mm2: positive("density", o.density_per_mm2, 1500.0)?,
        excitatory_fraction: default_excitatory(),
        connectivity: Connectivity {
            footprint: super::culture::Footprint::Gaussian,
            sigma_um: positive("sigma-um", o.sigma_um, 150.0)?,
            mean_in_degree: positive("in-degree", o.mean_in_degree, 100.0)?,
            weighted: false,
        },
        synaptic_delay_s: default_synaptic_delay(),
        axon_speed_mm_s: default_axon_speed(),
        neuron: NeuronParams {
            tau_m_s: 0.02,
            threshold_mv: 20.0,
            reset_mv: 10.0,
            refractory_s: 0.002,
        },
        drive: DriveParams {
            mean_mv: 14.0,
            sd_mv: 1.5,
            isolated_rates_hz: None,
        },
        noise: NoiseParams {
            rate_hz: 20.0,
            amplitude_mv: 1.0,
        },
        synapse: SynapseParams {
            excitatory_mv: 4.0,
            inhibitory_mv: 2.0,
            depression_u: 0.5,
            recovery_s: 3.0,
        },
        electrodes: (count > 0).then(|| Electrodes {
            layout: layout.0,
            offset_um: layout.1,
            pickup_radius_um: 60.0,
            detection_probability: 0.8,
            dead: Vec::new(),
            sampling_rate_hz: 25_000.0,
            voltage: None,
        }),
        imaging: (o.rois > 0).then_some(Imaging {
            rois: o.rois,
            frame_rate_hz: 20.0,
            decay_s: 0.5,
            amplitude: 0.3,
            noise_sd: 0.02,
        }),
        excitatory_scale: 1.0,
        calcium_scale: 1.0,
        stimulation: None,
    };
    check_network_scenario(&s)
        .map_err(|e| format!("the options describe a culture that cannot be run: {e}"))?;
    Ok(s)
}
