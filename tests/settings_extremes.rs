//! Every number of the recording settings (read, track, voltage and analysis), set in turn to
//! the ends of its range, on a spike list with stimuli, on ROI traces and on raw voltage: the
//! analysis gives a result or an error that names the setting, and never panics (issue 17).
//! The extremes are listed first; a proptest then draws values from the whole range of
//! doubles and 64-bit integers.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod extremes;

use proptest::prelude::*;
use ringline::{analyze_file, ActivityFile, RecordingSettings};
use serde_json::Value;
use std::path::Path;
use std::sync::OnceLock;

/// The three recordings, as (activity name, bytes, sidecar, layout, stimuli).
struct Inputs {
    spikes: (Vec<u8>, Vec<u8>, Vec<u8>),
    traces: (Vec<u8>, Vec<u8>),
    voltage: (Vec<u8>, Vec<u8>, Vec<u8>),
}

fn demo(path: &str) -> Vec<u8> {
    std::fs::read(
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("../demo-data")
            .join(path),
    )
    .unwrap()
}

fn inputs() -> &'static Inputs {
    static INPUTS: OnceLock<Inputs> = OnceLock::new();
    INPUTS.get_or_init(|| {
        // ROI traces: the first 20 s (400 frames) of the network strip's imaging.
        let traces = String::from_utf8(demo("network-strip-16/traces.csv")).unwrap();
        let traces: String = traces.lines().take(401).map(|l| format!("{l}\n")).collect();
        // Raw voltage: 2 s at 10 kHz on the 16 sites of the kinematic strip, with the spikes
        // of its list in that time.
        let list = String::from_utf8(demo("strip-16/spikes.csv")).unwrap();
        let mut trains: Vec<ringline::import::SiteSpikes> = Vec::new();
        for line in list.lines().skip(1) {
            let (site, ms) = line.split_once(',').unwrap();
            let t = ms.parse::<f64>().unwrap() / 1000.0;
            if !trains.iter().any(|s| s.site == site) {
                trains.push(ringline::import::SiteSpikes {
                    site: site.to_string(),
                    times_s: Vec::new(),
                });
            }
            if t < 2.0 {
                trains
                    .iter_mut()
                    .find(|s| s.site == site)
                    .unwrap()
                    .times_s
                    .push(t);
            }
        }
        let (raw, sidecar) = ringline::simulate::voltage::electrode_voltage(
            &trains,
            &[],
            2.0,
            10_000.0,
            &ringline::simulate::voltage::VoltageOutput {
                noise_uv: 5.0,
                spike_uv: 80.0,
                scale_uv: 0.1,
            },
            11,
        );
        Inputs {
            spikes: (
                demo("blocker-60/spikes.csv"),
                demo("blocker-60/layout.csv"),
                demo("blocker-60/stimuli.csv"),
            ),
            traces: (traces.into_bytes(), demo("network-strip-16/roi_layout.csv")),
            voltage: (raw, sidecar.into_bytes(), demo("strip-16/layout.csv")),
        }
    })
}

/// One run's files: activity name and bytes, sidecar, layout, stimuli.
type Case<'a> = (
    &'a str,
    &'a [u8],
    Option<&'a [u8]>,
    &'a [u8],
    Option<&'a [u8]>,
);

/// Every numeric (or absent, `null`) leaf of the default settings, as a JSON pointer.
fn leaves() -> Vec<String> {
    let mut out = Vec::new();
    extremes::numeric_leaves(
        &serde_json::to_value(RecordingSettings::default()).unwrap(),
        "",
        true,
        &mut out,
    );
    out
}

/// Runs the recording the leaf concerns with the leaf set to `value`. `None` when the value
/// does not fit the field's type (that refusal is the settings reader's, tested elsewhere);
/// otherwise `Ok` or the error's sentence.
fn run(leaf: &str, value: &Value) -> Option<Result<(), String>> {
    let mut settings = serde_json::to_value(RecordingSettings::default()).unwrap();
    *settings.pointer_mut(leaf).unwrap() = value.clone();
    let settings: RecordingSettings = serde_json::from_value(settings).ok()?;
    let inputs = inputs();
    let (name, bytes, sidecar, layout, stimuli): Case<'_> = if leaf.starts_with("/voltage") {
        let v = &inputs.voltage;
        ("voltage.raw", &v.0, Some(&v.1), &v.2, None)
    } else if leaf.starts_with("/analysis/calcium") || leaf == "/read/frame_rate_hz" {
        let t = &inputs.traces;
        ("traces.csv", &t.0, None, &t.1, None)
    } else {
        let s = &inputs.spikes;
        ("spikes.csv", &s.0, None, &s.1, Some(&s.2))
    };
    let mut read = |from: u64, to: u64| Ok(bytes[from as usize..to as usize].to_vec());
    let file = ActivityFile {
        name,
        len: bytes.len() as u64,
        head: &bytes[..bytes.len().min(65_536)],
        read: &mut read,
        sidecar: sidecar.map(|s| ("voltage.json", s)),
        wav_uv_per_unit: 1.0,
    };
    let outcome = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
        analyze_file(
            file,
            ("layout.csv", layout),
            stimuli.map(|s| ("stimuli.csv", s)),
            &settings,
            &mut |_, _, _| {},
        )
    }));
    match outcome {
        Err(cause) => Some(Err(format!("PANIC {}", extremes::panic_words(&*cause)))),
        Ok(Ok(report)) => {
            // Whatever it found, every reported number must print (no NaN speeds in a
            // summary that says it measured them).
            assert!(!report.to_text().is_empty());
            assert!(!report.output_files().is_empty());
            Some(Ok(()))
        }
        Ok(Err(e)) => Some(Err(e.to_string())),
    }
}

/// What is wrong with a refusal, if anything: a panic, or a message that does not name the
/// setting it refuses (its last key or, for an array item, the array's key).
fn fault(leaf: &str, value: &Value, message: &str) -> Option<String> {
    if message.starts_with("PANIC") {
        return Some(format!("{leaf} = {value}: {message}"));
    }
    let key = extremes::key_of(leaf);
    (!message.contains(key))
        .then(|| format!("{leaf} = {value}: the refusal does not name '{key}': {message}"))
}

const FLOAT_EXTREMES: [f64; 10] = [
    0.0,
    -1.0,
    -1e300,
    f64::MIN_POSITIVE,
    1e-12,
    0.5,
    1e9,
    1e12,
    1e300,
    f64::MAX,
];

/// The ends of every range, field by field.
#[test]
fn every_setting_at_the_ends_of_its_range_gives_a_result_or_names_itself() {
    std::panic::set_hook(Box::new(|_| {}));
    let (mut refused, mut ran) = (0, 0);
    let mut faults = Vec::new();
    for leaf in leaves() {
        let mut values: Vec<Value> = FLOAT_EXTREMES.iter().map(|&v| Value::from(v)).collect();
        values.extend([
            Value::from(0u64),
            Value::from(1u64),
            Value::from(1_000_000_000_000u64),
            Value::from(u64::MAX),
            Value::from(-1i64),
        ]);
        for value in values {
            // Shown only when the test fails (an abort leaves no other trace of the case).
            eprintln!("{leaf} = {value}");
            match run(&leaf, &value) {
                None => {}
                Some(Ok(())) => ran += 1,
                Some(Err(message)) => {
                    refused += 1;
                    faults.extend(fault(&leaf, &value, &message));
                }
            }
        }
    }
    let _ = std::panic::take_hook();
    eprintln!("{ran} runs gave results, {refused} were refused");
    assert!(
        faults.is_empty(),
        "{} faults:\n{}",
        faults.len(),
        faults.join("\n")
    );
    assert!(ran > 0 && refused > 0);
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 96, ..ProptestConfig::default() })]
    /// Values from anywhere in the range of doubles and of 64-bit integers.
    #[test]
    fn any_number_in_any_setting_gives_a_result_or_names_itself(
        pick in any::<prop::sample::Index>(),
        value in extremes::any_json_number(),
    ) {
        let all = leaves();
        let leaf = &all[pick.index(all.len())];
        if let Some(Err(message)) = run(leaf, &value) {
            let fault = fault(leaf, &value, &message);
            prop_assert!(fault.is_none(), "{}", fault.unwrap_or_default());
        }
    }
}
