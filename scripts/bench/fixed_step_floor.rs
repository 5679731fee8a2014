//! The least a fixed-step integrator of the benchmark network could cost: only the dense
//! per-step update of every neuron (decay towards the drive, the step's summed input,
//! threshold, reset, refractory count-down) at dt = 0.1 ms for 100,000 neurons, with no
//! synaptic delivery and no noise. `scripts/bench-simulate` compiles and runs it to show
//! whether a fixed step (which the model allows, with its error stated) could meet a time
//! goal that the exact event-driven integrator misses. Usage: fixed_step_floor [STEPS].
use std::time::Instant;

fn main() {
    let neurons = 100_000usize;
    let steps: usize = std::env::args()
        .nth(1)
        .and_then(|s| s.parse().ok())
        .unwrap_or(20_000);
    let (dt, tau_m) = (1e-4f64, 0.02f64);
    let decay = (-dt / tau_m).exp();
    // Drives of 14-17 mV as in the benchmark scenario, each relaxed towards over one step.
    let toward: Vec<f64> = (0..neurons)
        .map(|i| (14.0 + ((i * 7919) % 1000) as f64 * 0.003) * (1.0 - decay))
        .collect();
    let mut v = vec![0.0f64; neurons];
    let mut input = vec![0.0f64; neurons];
    let mut refractory = vec![0u16; neurons];
    let mut spikes = 0u64;
    let start = Instant::now();
    for step in 0..steps {
        // One strong input per step, so that some neurons fire and reset.
        input[(step * 9973) % neurons] += 25.0;
        for i in 0..neurons {
            let r = refractory[i];
            let next = v[i] * decay + toward[i] + input[i];
            input[i] = 0.0;
            let fire = next >= 20.0 && r == 0;
            v[i] = if r > 0 || fire { 10.0 } else { next };
            refractory[i] = if r > 0 {
                r - 1
            } else if fire {
                20
            } else {
                0
            };
            spikes += u64::from(fire);
        }
    }
    let seconds = start.elapsed().as_secs_f64();
    println!(
        "fixed-step floor: {steps} steps of 0.1 ms x {neurons} neurons in {seconds:.2} s ({:.2} ns per neuron and step, {spikes} spikes); 60 s of culture would take {:.1} s before any synapse or noise",
        seconds / (steps * neurons) as f64 * 1e9,
        seconds * 600_000.0 / steps as f64
    );
}
