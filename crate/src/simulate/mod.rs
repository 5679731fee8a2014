//! Simulation of recordings with known ground truth.
