//! Every number of every demo scenario (the kinematic front model and the spiking network),
//! set in turn to the ends of its range and then to values drawn from the whole range of
//! doubles and 64-bit integers: the simulator gives its files or an error that names the
//! field (or, for a value its type cannot hold, the line and column of the value), and never
//! panics (issue 17). The scenarios are shortened to one second of culture and a small
//! pattern first, so that an accepted value runs quickly; a run that still passes a few
//! seconds of work is stopped from its progress report and counted as bounded, not failed.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod extremes;

use proptest::prelude::*;
use serde_json::Value;
use std::path::Path;
use std::sync::OnceLock;
use std::time::{Duration, Instant};

/// The demo scenarios, shortened (see the module's note), as (name, JSON).
fn scenarios() -> &'static [(String, Value)] {
    static SCENARIOS: OnceLock<Vec<(String, Value)>> = OnceLock::new();
    SCENARIOS.get_or_init(|| {
        let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("../demo-data/scenarios");
        let mut out: Vec<(String, Value)> = std::fs::read_dir(&dir)
            .unwrap()
            .map(|e| e.unwrap().path())
            .filter(|p| p.extension().is_some_and(|x| x == "json"))
            .map(|p| {
                let mut v: Value =
                    serde_json::from_str(&std::fs::read_to_string(&p).unwrap()).unwrap();
                shorten(&mut v);
                (p.file_stem().unwrap().to_string_lossy().into_owned(), v)
            })
            .collect();
        out.sort_by(|a, b| a.0.cmp(&b.0));
        assert!(
            out.len() >= 10,
            "the demo scenarios are in demo-data/scenarios"
        );
        out
    })
}

/// One second of culture, patterns of at most 1.5 mm, and a stimulus protocol that fits.
fn shorten(v: &mut Value) {
    v["duration_s"] = Value::from(1.0);
    if let Some(stimulation) = v.get_mut("stimulation").filter(|p| p.is_object()) {
        stimulation["start_s"] = Value::from(0.1);
        stimulation["interval_s"] = Value::from(0.1);
        stimulation["repeats"] = Value::from(1);
    }
    if let Some(pattern) = v.get_mut("pattern").filter(|p| p.is_object()) {
        for key in ["length_um", "width_um", "height_um", "radius_um"] {
            if let Some(x) = pattern.get_mut(key).filter(|x| x.is_number()) {
                *x = Value::from(x.as_f64().unwrap().min(1500.0));
            }
        }
    }
}

/// Every numeric leaf of a scenario, as a JSON pointer.
fn leaves_of(scenario: &Value) -> Vec<String> {
    let mut out = Vec::new();
    extremes::numeric_leaves(scenario, "", false, &mut out);
    out
}

/// A run past this much work is stopped from its progress report (bounded, not failed).
const BUDGET: Duration = Duration::from_secs(4);

/// What became of one scenario.
enum Outcome {
    Files,
    Refused(String),
    Stopped,
    Panicked(String),
}

/// Simulates `scenario` with `leaf` set to `value`, as the command line does (text, then
/// `simulate::parse_scenario` and `simulate::simulation_files`).
fn run(scenario: &Value, leaf: &str, value: &Value) -> Outcome {
    let mut s = scenario.clone();
    *s.pointer_mut(leaf).unwrap() = value.clone();
    // One key per line, so that a reading error's line names the key.
    let text = serde_json::to_string_pretty(&s).unwrap();
    let started = Instant::now();
    let outcome = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
        let parsed = ringline::simulate::parse_scenario(&text)?;
        ringline::simulate::simulation_files(&parsed, &mut |_, _, _| {
            if started.elapsed() > BUDGET {
                std::panic::panic_any(Stop);
            }
        })
    }));
    match outcome {
        Ok(Ok(out)) => {
            assert!(!out.files.is_empty());
            Outcome::Files
        }
        Ok(Err(message)) => Outcome::Refused(message),
        Err(cause) if cause.is::<Stop>() => Outcome::Stopped,
        Err(cause) => Outcome::Panicked(extremes::panic_words(&*cause)),
    }
}

/// The payload with which a run over its budget is stopped.
struct Stop;

/// What is wrong with an outcome, if anything: a panic, or a refusal that names neither the
/// field (its last key or, for an array item, the array's key) nor the line of the value.
fn fault(name: &str, leaf: &str, value: &Value, outcome: &Outcome) -> Option<String> {
    match outcome {
        Outcome::Files | Outcome::Stopped => None,
        Outcome::Panicked(message) => Some(format!("{name} {leaf} = {value}: PANIC {message}")),
        Outcome::Refused(message) => {
            let key = extremes::key_of(leaf);
            let located = message.contains(key) || message.starts_with("line ");
            (!located).then(|| {
                format!("{name} {leaf} = {value}: the refusal names neither '{key}' nor a line: {message}")
            })
        }
    }
}

const FLOAT_EXTREMES: [f64; 9] = [
    0.0,
    -1.0,
    -1e300,
    f64::MIN_POSITIVE,
    1e-12,
    1e9,
    1e12,
    1e300,
    f64::MAX,
];

/// The ends of every range, field by field, on the two kinds of scenario.
#[test]
fn every_scenario_field_at_the_ends_of_its_range_gives_files_or_names_itself() {
    std::panic::set_hook(Box::new(|_| {}));
    let (mut files, mut refused, mut stopped) = (0, 0, 0);
    let mut faults = Vec::new();
    for (name, scenario) in scenarios()
        .iter()
        .filter(|(n, _)| n == "strip-16" || n == "network-strip-16")
    {
        for leaf in leaves_of(scenario) {
            let mut values: Vec<Value> = FLOAT_EXTREMES.iter().map(|&v| Value::from(v)).collect();
            values.extend([
                Value::from(0u64),
                Value::from(1_000_000_000_000u64),
                Value::from(u64::MAX),
                Value::from(-1i64),
                Value::from(i64::MIN),
            ]);
            for value in values {
                // Shown only when the test fails (an abort leaves no other trace of the case).
                eprintln!("{name} {leaf} = {value}");
                let outcome = run(scenario, &leaf, &value);
                match outcome {
                    Outcome::Files => files += 1,
                    Outcome::Stopped => stopped += 1,
                    _ => refused += 1,
                }
                faults.extend(fault(name, &leaf, &value, &outcome));
            }
        }
    }
    let _ = std::panic::take_hook();
    eprintln!(
        "{files} runs gave files, {refused} were refused, {stopped} were stopped at the budget"
    );
    assert!(
        faults.is_empty(),
        "{} faults:\n{}",
        faults.len(),
        faults.join("\n")
    );
    assert!(files > 0 && refused > 0);
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 64, ..ProptestConfig::default() })]
    /// Values from anywhere in the range of doubles and of 64-bit integers, in any field of
    /// any demo scenario.
    #[test]
    fn any_number_in_any_scenario_field_gives_files_or_names_itself(
        which in any::<prop::sample::Index>(),
        pick in any::<prop::sample::Index>(),
        value in extremes::any_json_number(),
    ) {
        let (name, scenario) = &scenarios()[which.index(scenarios().len())];
        let all = leaves_of(scenario);
        let leaf = &all[pick.index(all.len())];
        let outcome = run(scenario, leaf, &value);
        let fault = fault(name, leaf, &value, &outcome);
        prop_assert!(fault.is_none(), "{}", fault.unwrap_or_default());
    }
}
