//! A spiking network grown in a pattern: neurons placed at a density, wired by distance,
//! integrated as leaky integrate-and-fire units with short-term depression, and recorded by
//! virtual electrodes or calcium imaging, with the ground truth of every front.

pub mod culture;
mod decay;
pub mod dynamics;
pub mod scenario;
pub mod stimulation;

pub use culture::{
    graph_stats, place_neurons, wire, wire_checked, Connectivity, Footprint, GraphStats, Pattern,
    Synapses, WiringCheck,
};
pub use dynamics::{
    integrate, isolated_rate_hz, Network, NeuronParams, NoiseParams, Run, Spike, SynapseParams,
};
pub use scenario::{
    in_degree_sweep, in_degree_sweep_csv, oscillator_drive_mv, scenario_from_options,
    simulate_network, CultureOptions, CultureShape, DriveParams, Electrodes, Imaging,
    InDegreePoint, NetworkRecording, NetworkScenario, NetworkTruth, NetworkTruthBurst, SiteNeurons,
    CALCIUM_DRIVE_MV, CULTURE_DURATION_S, CULTURE_SEED,
};
