//! The bad-input corpus (`tests/bad-inputs/`, written by its `make.py`; issue 17) through the
//! `ringline` command as a user runs it. Each row of `cases.tsv` gives the arguments, the
//! exit code, the place the message must name (file, line, column, site, or the setting's
//! key) and its first words; a refused input writes nothing to `--out` and nothing to stdout.
//! The good variants (BOM, CRLF, tabs, semicolons, a long WAV metadata chunk) exit 0, some
//! with the notice named in the words column. Two cases too large to commit are made here:
//! a 10 MB line and a header of 100,000 columns.
//!
//! Expectations: common practice, no source (a refusal is exit code 2 with a located
//! sentence); the WAV layout is the RIFF/WAVE format (Microsoft, 1991).

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod common;

use common::ringline;
use std::path::{Path, PathBuf};

fn corpus() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../tests/bad-inputs")
}

struct Case {
    name: String,
    args: Vec<String>,
    exit: i32,
    place: String,
    words: String,
}

fn cases() -> Vec<Case> {
    let text = std::fs::read_to_string(corpus().join("cases.tsv")).unwrap();
    text.lines()
        .filter(|l| !l.starts_with('#') && !l.trim().is_empty())
        .map(|l| {
            let f: Vec<&str> = l.split('\t').collect();
            assert_eq!(f.len(), 5, "cases.tsv: {l}");
            Case {
                name: f[0].into(),
                args: f[1].split(' ').map(String::from).collect(),
                exit: f[2].parse().unwrap(),
                place: f[3].into(),
                words: f[4].into(),
            }
        })
        .collect()
}

/// Runs one case with `{out}` replaced by a fresh folder; checks the exit code, stdout,
/// the folder, and the message's place and words.
fn check(case: &Case, dir: &Path, scratch: &Path) {
    let out = scratch.join(format!("out-{}", case.name));
    let args: Vec<String> = case
        .args
        .iter()
        .map(|a| a.replace("{out}", out.to_str().unwrap()))
        .collect();
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let run = ringline(&args, dir);
    let stderr = String::from_utf8_lossy(&run.stderr);
    let stdout = String::from_utf8_lossy(&run.stdout);
    assert_eq!(
        run.status.code(),
        Some(case.exit),
        "{}: {stderr}{stdout}",
        case.name
    );
    if case.exit == 2 {
        assert!(stdout.is_empty(), "{}: printed {stdout}", case.name);
        assert!(!out.exists(), "{}: wrote {}", case.name, out.display());
        assert!(
            !case.place.is_empty() && stderr.contains(&case.place),
            "{}: expected the place '{}' in: {stderr}",
            case.name,
            case.place
        );
        assert!(stderr.len() < 2000, "{}: {} bytes", case.name, stderr.len());
    }
    let said = format!("{stderr}{stdout}");
    assert!(
        said.contains(&case.words),
        "{}: expected '{}' in: {said}",
        case.name,
        case.words
    );
}

/// A refused case made in the test (too large to commit): `file` written into a fresh
/// folder beside the corpus's good layout, then [`check`]ed.
fn check_made(file: &str, bytes: &[u8], args: &str, place: &str, words: &str) {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join(file), bytes).unwrap();
    std::fs::copy(
        corpus().join("good-layout.csv"),
        dir.path().join("good-layout.csv"),
    )
    .unwrap();
    let case = Case {
        name: file.into(),
        args: args.split(' ').map(String::from).collect(),
        exit: 2,
        place: place.into(),
        words: words.into(),
    };
    check(&case, dir.path(), dir.path());
}

#[test]
fn the_corpus_has_every_case_the_hardening_asked_for() {
    let cases = cases();
    let files = std::fs::read_dir(corpus()).unwrap().count();
    assert!(cases.len() >= 60, "{} cases", cases.len());
    assert!(files >= 60, "{files} files");
    // Every file the generator wrote is used by some case (none left untested).
    for entry in std::fs::read_dir(corpus()).unwrap() {
        let name = entry.unwrap().file_name().into_string().unwrap();
        if name == "make.py" || name == "cases.tsv" || name.ends_with(".json") {
            continue; // sidecars are found beside their samples
        }
        assert!(
            cases.iter().any(|c| c.args.contains(&name)),
            "{name} is in the corpus but no case uses it"
        );
    }
}

#[test]
fn every_corpus_input_exits_0_or_2_with_a_located_message() {
    let scratch = tempfile::tempdir().unwrap();
    for case in cases() {
        check(&case, &corpus(), scratch.path());
    }
}

/// A 10 MB field is refused by line and column, and the message quotes at most a short
/// piece of it (the field is echoed in 20 MB of stderr otherwise).
#[test]
fn a_ten_megabyte_line_is_refused_with_a_short_message() {
    let mut text = b"site,time_s\nA,0.5\nB,".to_vec();
    text.extend(std::iter::repeat_n(b'7', 10 << 20));
    text.extend_from_slice(b"x\n");
    check_made(
        "long.csv",
        &text,
        "analyze long.csv --layout good-layout.csv --out {out}",
        "long.csv, line 3, column 2 ('time_s')",
        "expected a spike time in seconds",
    );
}

/// 100,000 columns with one name twice: found by a hash of the names, not by comparing every
/// pair (which took 44.5 s at this size), and named by both columns.
#[test]
fn a_header_of_a_hundred_thousand_columns_is_checked_in_linear_time() {
    let mut header: Vec<String> = vec!["site".into(), "time_s".into()];
    header.extend((0..100_000).map(|i| format!("extra_{i}")));
    header.push("extra_5".into());
    check_made(
        "wide.csv",
        format!("{}\nA,0.5\n", header.join(",")).as_bytes(),
        "inspect wide.csv --layout good-layout.csv",
        "wide.csv, column 100003 ('extra_5')",
        "appears twice (also column 8)",
    );
}

/// The page's reason for a file of no known kind (`import::why_unrecognised`, shown where the
/// command line prints its error) names the same place as the command line, for every file
/// of the corpus the classifier cannot place.
#[test]
fn a_file_of_no_known_kind_is_explained_at_the_command_lines_place() {
    let mut explained = 0;
    for case in cases() {
        if case.exit != 2 || case.args.first().map(String::as_str) != Some("analyze") {
            continue;
        }
        for file in [&case.args[1], &case.args[3]] {
            let bytes = std::fs::read(corpus().join(file)).unwrap();
            let head = &bytes[..bytes.len().min(65_536)];
            if ringline::import::classify_input(file, head) != ringline::import::InputKind::Unknown
            {
                continue;
            }
            let why = ringline::import::why_unrecognised(file, head).to_string();
            assert!(
                why.contains(&case.place),
                "{}: expected '{}' in: {why}",
                case.name,
                case.place
            );
            explained += 1;
        }
    }
    assert!(explained >= 6, "{explained} files of no known kind");
}
