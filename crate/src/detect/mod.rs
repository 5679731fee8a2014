//! Detection: network bursts from spike trains, spikes from raw voltage ([`voltage`], with
//! the band-pass of [`filter`]), and events from fluorescence ([`calcium`]).

mod bursts;
pub mod calcium;
pub mod filter;
pub mod voltage;

pub use bursts::{
    chance_windows, detect_bursts, population_rate, BurstDetection, BurstDetector, BurstSettings,
    IsiNSettings, NetworkBurst, PopulationRate, PopulationRateSettings,
};
