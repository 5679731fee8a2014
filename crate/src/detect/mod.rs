//! Detection: network bursts from spike trains (and, in a later issue, spikes from voltage
//! and events from fluorescence).

mod bursts;
pub mod filter;
pub mod voltage;

pub use bursts::{
    detect_bursts, population_rate, BurstDetector, BurstSettings, IsiNSettings, NetworkBurst,
    PopulationRate, PopulationRateSettings,
};
