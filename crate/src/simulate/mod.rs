//! Simulation of recordings with known ground truth, in the project's own import formats.
//!
//! [`fronts`] draws fronts with a prescribed speed, direction and timing jitter straight
//! onto virtual electrodes (a kinematic model: no neurons), for checking the analysis
//! against known answers and for the demo recordings.
//!
//! All randomness goes through ChaCha8 seeded from the scenario, and every transcendental
//! function on the sampling path comes from the pure-Rust `libm`, so a native and a wasm run
//! with the same seed write the same bytes.

pub mod fronts;
pub mod network;
mod sample;
pub mod voltage;

pub use fronts::{
    simulate_fronts, ElectrodeLayout, FrontPattern, FrontScenario, FrontTruth, SimulatedFronts,
    TruthBurst,
};

use serde::{Deserialize, Serialize};

/// A scenario file: which model, and its settings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "model", rename_all = "snake_case")]
pub enum Scenario {
    /// Kinematic fronts drawn onto electrodes.
    Fronts(FrontScenario),
    /// A spiking network grown in a pattern (see [`network`]).
    Network(Box<network::NetworkScenario>),
}

/// Refuses the first named value that is not a finite number above 0, naming it.
pub(crate) fn require_positive(values: &[(&str, f64)]) -> Result<(), String> {
    match values.iter().find(|(_, v)| !(v.is_finite() && *v > 0.0)) {
        Some((name, v)) => Err(format!(
            "{name}: expected a number above 0, found {}",
            crate::place::number(*v)
        )),
        None => Ok(()),
    }
}

/// Refuses the first named value that is not a finite number of 0 or more, naming it.
pub(crate) fn require_non_negative(values: &[(&str, f64)]) -> Result<(), String> {
    match values.iter().find(|(_, v)| !(v.is_finite() && *v >= 0.0)) {
        Some((name, v)) => Err(format!(
            "{name}: expected a number of 0 or more, found {}",
            crate::place::number(*v)
        )),
        None => Ok(()),
    }
}

/// Reads a scenario from JSON text; the error says what is wrong in the scenario's words, at
/// its line (a syntax error) or its key (a value of the wrong kind).
pub fn parse_scenario(text: &str) -> Result<Scenario, String> {
    serde_json::from_str(text).map_err(|e| {
        if let Some(located) = scenario_error_by_key(text) {
            return located;
        }
        // serde reports no position for errors inside a tagged scenario; say none then.
        let words = e.to_string();
        let words = words
            .split(" at line ")
            .next()
            .unwrap_or(&words)
            .to_string();
        if e.line() == 0 {
            format!("the scenario cannot be read: {words}")
        } else {
            format!("line {}, column {}: {words}", e.line(), e.column())
        }
    })
}

/// The key of a value a scenario cannot hold, and why: the tagged scenario is read again as
/// the model's own settings, whose reader tracks the path. `None` when the text is not a
/// scenario of a known model.
fn scenario_error_by_key(text: &str) -> Option<String> {
    let mut value: serde_json::Value = serde_json::from_str(text).ok()?;
    let model = value.as_object_mut()?.remove("model")?;
    let error = match model.as_str()? {
        "fronts" => serde_path_to_error::deserialize::<_, FrontScenario>(value.clone()).err()?,
        "network" => {
            serde_path_to_error::deserialize::<_, network::NetworkScenario>(value.clone()).err()?
        }
        _ => return None,
    };
    let mut key = error.path().to_string();
    if key.is_empty() || key == "." {
        return None;
    }
    let words = crate::expected_then_found(crate::json_error_words(error.inner()));
    // Inside a tagged object (an electrode layout by shape) the path stops at the object: name
    // the one field that holds the value found.
    if let Some(field) = field_holding(&value, &key, &words) {
        key = format!("{key}.{field}");
    }
    Some(format!("{key}: {words}"))
}

/// The one field of the object at the dotted `key` of `value` whose number is the one `words`
/// quotes (serde quotes it between backticks), of the kind it names; `None` when there is not
/// exactly one.
fn field_holding(value: &serde_json::Value, key: &str, words: &str) -> Option<String> {
    if key.contains('[') {
        return None;
    }
    let object = value
        .pointer(&format!("/{}", key.replace('.', "/")))?
        .as_object()?;
    let quoted: f64 = words.split('`').nth(1)?.parse().ok()?;
    // serde says which kind it found ("floating point `0.0`", "integer `-1`").
    let float = words.contains("found floating point");
    let mut holding = object
        .iter()
        .filter(|(_, v)| v.as_f64() == Some(quoted) && v.is_f64() == float)
        .map(|(k, _)| k.clone());
    match (holding.next(), holding.next()) {
        (Some(field), None) => Some(field),
        _ => None,
    }
}

/// What a simulation gives: its files, as (file name, content), and the notices of what it
/// could not do as asked (also in `truth.json`).
#[derive(Debug, Clone, PartialEq)]
pub struct SimulationOutput {
    pub files: Vec<(String, Vec<u8>)>,
    pub notices: Vec<String>,
}

/// The files a simulation writes, as (file name, content): `spikes.csv` (times in ms with
/// two decimals, i.e. a 10 us quantum) and `layout.csv` for electrodes, with `voltage.raw`
/// and `voltage.json` when the electrodes write voltage; `traces.csv` and `roi_layout.csv`
/// for imaging; and `truth.json`. `progress(stage, done, total)` reports long runs.
pub fn simulation_files(
    scenario: &Scenario,
    progress: &mut dyn FnMut(&str, f64, f64),
) -> Result<SimulationOutput, String> {
    match scenario {
        Scenario::Network(s) => {
            let rec = network::simulate_network(s, progress)?;
            let mut files: Vec<(String, Vec<u8>)> = Vec::new();
            if let Some((sites, spikes)) = &rec.electrodes {
                files.push((
                    "spikes.csv".to_string(),
                    crate::import::write_spike_list_as(
                        spikes,
                        crate::import::TimeUnit::Milliseconds,
                        Some(2),
                    )
                    .into_bytes(),
                ));
                files.push((
                    "layout.csv".to_string(),
                    crate::import::write_layout(sites).into_bytes(),
                ));
                if let Some(e) = &s.electrodes {
                    if let Some(out) = &e.voltage {
                        progress("writing voltage", 0.0, s.duration_s);
                        // A stream of its own, so adding voltage leaves the other files as they were.
                        let (raw, sidecar) = voltage::electrode_voltage(
                            spikes,
                            &e.dead,
                            s.duration_s,
                            e.sampling_rate_hz,
                            out,
                            s.seed ^ 0x766f_6c74,
                        );
                        files.push(("voltage.raw".to_string(), raw));
                        files.push(("voltage.json".to_string(), sidecar.into_bytes()));
                    }
                }
            }
            if let Some((sites, time_s, rois)) = &rec.imaging {
                files.push((
                    "traces.csv".to_string(),
                    crate::import::write_roi_traces(time_s, rois).into_bytes(),
                ));
                files.push((
                    "roi_layout.csv".to_string(),
                    crate::import::write_layout(sites).into_bytes(),
                ));
            }
            if let Some(text) = &rec.stimuli_csv {
                files.push(("stimuli.csv".to_string(), text.clone().into_bytes()));
            }
            let truth = serde_json::to_string_pretty(&rec.truth).map_err(|e| e.to_string())? + "\n";
            files.push(("truth.json".to_string(), truth.into_bytes()));
            Ok(SimulationOutput {
                files,
                notices: rec.truth.notices,
            })
        }
        Scenario::Fronts(s) => {
            let sim = simulate_fronts(s)?;
            let truth = serde_json::to_string_pretty(&sim.truth).map_err(|e| e.to_string())? + "\n";
            let files = vec![
                (
                    "spikes.csv".into(),
                    crate::import::write_spike_list_as(
                        &sim.spikes,
                        crate::import::TimeUnit::Milliseconds,
                        Some(2),
                    )
                    .into_bytes(),
                ),
                (
                    "layout.csv".into(),
                    crate::import::write_layout(&sim.sites).into_bytes(),
                ),
                ("truth.json".into(), truth.into_bytes()),
            ];
            Ok(SimulationOutput {
                files,
                notices: Vec::new(),
            })
        }
    }
}

/// The files of a network culture built from options ([`network::scenario_from_options`]):
/// those of [`simulation_files`], then `scenario.json`, the scenario that ran, to edit and
/// run again.
pub fn culture_files(
    options: &network::CultureOptions,
    progress: &mut dyn FnMut(&str, f64, f64),
) -> Result<SimulationOutput, String> {
    let scenario = Scenario::Network(Box::new(network::scenario_from_options(options)?));
    let mut output = simulation_files(&scenario, progress)?;
    let text = serde_json::to_string_pretty(&scenario).map_err(|e| e.to_string())? + "\n";
    output
        .files
        .push(("scenario.json".to_string(), text.into_bytes()));
    Ok(output)
}
