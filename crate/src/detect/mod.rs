//! Detection: network bursts from spike trains, spikes from raw voltage ([`voltage`], with
//! the band-pass of [`filter`]), and events from fluorescence ([`calcium`]).

mod bursts;
pub mod calcium;
pub mod filter;
pub mod voltage;

pub use bursts::{
    detect_bursts, population_rate, BurstDetector, BurstSettings, IsiNSettings, NetworkBurst,
    PopulationRate, PopulationRateSettings,
};
