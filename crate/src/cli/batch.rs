//! `ringline batch` and `ringline combine`: file handling, threads and progress around the
//! core's study functions ([`crate::study`]).

use super::{analyze_paths, read_file, read_text, write_outputs, Failure};
use crate::import::{ImportLimits, Manifest, ManifestRow};
use crate::study::{self, RecordingOutputs, RecordingStatus, RECORDINGS_FOLDER, STATUS_FILE};
use crate::RecordingSettings;
use std::path::{Path, PathBuf};

/// Exit code when the study ran but one or more recordings failed.
pub const EXIT_SOME_FAILED: i32 = 3;

/// Which share of a manifest one run takes: `index` of `count`, from 1.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Shard {
    pub index: usize,
    pub count: usize,
}

impl Shard {
    pub fn parse(text: &str) -> Result<Shard, String> {
        let parsed = text
            .split_once('/')
            .and_then(|(i, n)| Some((i.trim().parse().ok()?, n.trim().parse().ok()?)));
        match parsed {
            Some((index, count)) if index >= 1 && index <= count => Ok(Shard { index, count }),
            _ => Err(format!(
                "--shard: expected I/N with 1 <= I <= N (for example 2/8), found '{text}'"
            )),
        }
    }

    /// Rows are dealt out in turn, so every shard gets a like mix of the manifest.
    fn takes(&self, row: &ManifestRow) -> bool {
        row.index % self.count == self.index - 1
    }
}

/// What a batch run needs besides the manifest.
pub struct BatchJob {
    pub manifest_path: String,
    pub out: String,
    pub settings: RecordingSettings,
    pub wav_uv_per_unit: Option<f64>,
    pub shard: Option<Shard>,
    pub jobs: Option<usize>,
}

/// Runs every recording of the manifest (or of its shard); returns the exit code.
pub fn batch(job: &BatchJob) -> Result<i32, Failure> {
    use indicatif::{ProgressBar, ProgressStyle};
    use rayon::prelude::*;
    let bytes = read_file(&job.manifest_path, &ImportLimits::default())?;
    let manifest = crate::import::read_manifest(
        &bytes,
        &job.manifest_path,
        crate::import::ImportLimits::default(),
    )?;
    let base = Path::new(&job.manifest_path)
        .parent()
        .map(Path::to_path_buf)
        .unwrap_or_default();
    let rows: Vec<&ManifestRow> = manifest
        .rows
        .iter()
        .filter(|r| job.shard.is_none_or(|s| s.takes(r)))
        .collect();
    let out = PathBuf::from(&job.out);
    std::fs::create_dir_all(out.join(RECORDINGS_FOLDER)).map_err(Failure::Output)?;
    let bar = ProgressBar::new(rows.len() as u64);
    bar.set_style(
        ProgressStyle::with_template("{bar:30} {pos}/{len} recordings, {eta} left; running: {msg}")
            .unwrap_or_else(|_| ProgressStyle::default_bar()),
    );
    let running = std::sync::Mutex::new(Vec::<String>::new());
    let show_running = |name: &str, start: bool| {
        if let Ok(mut names) = running.lock() {
            if start {
                names.push(name.to_string());
            } else {
                names.retain(|n| n != name);
            }
            bar.set_message(names.join(", "));
        }
    };
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(job.jobs.unwrap_or(0))
        .build()
        .map_err(|e| Failure::Input(format!("--jobs: cannot start the threads: {e}")))?;
    let statuses: Vec<Result<RecordingStatus, Failure>> = pool.install(|| {
        rows.par_iter()
            .map(|row| {
                show_running(&row.recording, true);
                let status = run_one(&manifest, row, &base, &out, job);
                show_running(&row.recording, false);
                bar.inc(1);
                status
            })
            .collect()
    });
    bar.finish_and_clear();
    let mut failed = 0;
    for status in statuses {
        let status = status?;
        if let Some(message) = &status.message {
            failed += 1;
            eprintln!("ringline: {} failed: {message}", status.row.recording);
        }
    }
    let done = rows.len() - failed;
    match job.shard {
        Some(s) => eprintln!(
            "shard {} of {}: analysed {done} of {} recordings into {}; join the shards with `ringline combine`",
            s.index,
            s.count,
            rows.len(),
            job.out
        ),
        None => {
            let folders: Vec<PathBuf> = rows
                .iter()
                .map(|r| out.join(RECORDINGS_FOLDER).join(&r.recording))
                .collect();
            let tables = write_study_tables(&folders, &out)?;
            eprintln!(
                "analysed {done} of {} recordings; wrote {} and a folder per recording to {}",
                rows.len(),
                file_names(&tables),
                job.out
            );
        }
    }
    Ok(if failed > 0 { EXIT_SOME_FAILED } else { 0 })
}

/// Analyses one recording into its folder. A problem with its files or settings becomes a
/// failed status (and removes any earlier results there); only a failure to write is an error.
fn run_one(
    manifest: &Manifest,
    row: &ManifestRow,
    base: &Path,
    out: &Path,
    job: &BatchJob,
) -> Result<RecordingStatus, Failure> {
    let folder = out.join(RECORDINGS_FOLDER).join(&row.recording);
    if folder.is_dir() {
        std::fs::remove_dir_all(&folder).map_err(Failure::Output)?;
    }
    std::fs::create_dir_all(&folder).map_err(Failure::Output)?;
    let path = |p: &str| base.join(p).to_string_lossy().into_owned();
    let attempt = || -> Result<_, Failure> {
        let layer = match &row.settings {
            Some(file) => {
                let file = path(file);
                let text = read_text(&file, "JSON text")?;
                Some((file, text))
            }
            None => None,
        };
        let settings = study::recording_settings(
            &job.settings,
            row,
            layer.as_ref().map(|(f, t)| (f.as_str(), t.as_str())),
        )
        .map_err(|e| Failure::Input(e.to_string()))?;
        analyze_paths(
            &path(&row.data),
            &path(&row.layout),
            row.stimuli.as_deref().map(path).as_deref(),
            &settings,
            job.wav_uv_per_unit,
            &mut |_, _, _| {},
        )
    };
    let status = match attempt() {
        Ok(report) => {
            write_outputs(&folder, &report)?;
            RecordingStatus::analysed(manifest, row, &report)
        }
        Err(Failure::Input(message)) => RecordingStatus::failed(manifest, row, message),
        Err(e) => return Err(e),
    };
    std::fs::write(folder.join(STATUS_FILE), status.to_json()).map_err(Failure::Output)?;
    Ok(status)
}

/// Reads what the study tables need from recording folders.
fn read_outputs(folder: &Path) -> Result<RecordingOutputs, Failure> {
    let text = |name: &str| -> Result<Option<String>, Failure> {
        let path = folder.join(name);
        if !path.is_file() {
            return Ok(None);
        }
        read_text(&path.to_string_lossy(), "text").map(Some)
    };
    let status_json = text(STATUS_FILE)?.ok_or_else(|| {
        Failure::Input(format!(
            "{}: expected the {STATUS_FILE} of a study run in this folder, found none",
            folder.display()
        ))
    })?;
    Ok(RecordingOutputs {
        folder: folder.to_string_lossy().into_owned(),
        status_json,
        summary_json: text("summary.json")?,
        bursts_csv: text("bursts.csv")?,
        fronts_csv: text("fronts.csv")?,
    })
}

/// Writes the study tables of these recording folders into `out`.
fn write_study_tables(folders: &[PathBuf], out: &Path) -> Result<study::StudyTables, Failure> {
    let outputs = folders
        .iter()
        .map(|f| read_outputs(f))
        .collect::<Result<Vec<_>, _>>()?;
    let tables = study::combine(&outputs).map_err(|e| Failure::Input(e.to_string()))?;
    std::fs::create_dir_all(out).map_err(Failure::Output)?;
    for (name, text) in &tables.files {
        std::fs::write(out.join(name), text).map_err(Failure::Output)?;
    }
    Ok(tables)
}

/// `ringline combine DIR... --out DIR`: the study tables of every recording folder under the
/// given batch output folders. Returns the exit code (3 when some recordings had failed).
pub fn combine(dirs: &[String], out: &str) -> Result<i32, Failure> {
    let mut folders = Vec::new();
    for dir in dirs {
        let recordings = Path::new(dir).join(RECORDINGS_FOLDER);
        let entries = std::fs::read_dir(&recordings).map_err(|_| {
            Failure::Input(format!(
                "{dir}: expected the output folder of `ringline batch` (with a '{RECORDINGS_FOLDER}' folder inside), found none"
            ))
        })?;
        for entry in entries {
            let entry = entry.map_err(Failure::Output)?;
            if entry.path().is_dir() {
                folders.push(entry.path());
            }
        }
    }
    folders.sort();
    let tables = write_study_tables(&folders, Path::new(out))?;
    eprintln!(
        "joined {} recordings ({} failed); wrote {} to {out}",
        tables.recordings,
        tables.failed,
        file_names(&tables)
    );
    Ok(if tables.failed > 0 {
        EXIT_SOME_FAILED
    } else {
        0
    })
}

fn file_names(tables: &study::StudyTables) -> String {
    let names: Vec<&str> = tables.files.iter().map(|f| f.0.as_str()).collect();
    names.join(", ")
}
