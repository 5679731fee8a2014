//! The native command line: parses arguments, reads files, calls the library, prints.
//! No analysis lives here.
//!
//! Exit codes: 0 success; 2 a problem with the user's input or arguments (the message on
//! stderr names the place); 1 anything else (for example a failed write to stdout).

use crate::geometry::{TrackChoice, TrackSettings};
use crate::import::{
    FileKind, ImportError, ImportLimits, ImportProblem, LengthUnit, ReadOptions, TimeUnit,
};
use crate::place::Place;
use crate::report::AnalysisReport;
use crate::RecordingSettings;
mod batch;

use clap::{Args, Parser, Subcommand, ValueEnum};
use std::ffi::OsString;
use std::io::Write;

/// Exit code for problems with the user's input.
pub const EXIT_BAD_INPUT: i32 = 2;

#[derive(Parser, Debug)]
#[command(
    name = "ringline",
    version,
    about = "Fronts of network bursts in patterned neuronal cultures: import, track geometry, analysis.",
    after_help = "The same core runs in a web page that needs no installation: `scripts/start` serves it, and www/dist/ringline.html opens from disk. Everything is computed in the tab; no file leaves the computer."
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Read a recording and its layout; report sites, spikes, rates and the detected track.
    Inspect(InspectArgs),
    /// Find network bursts, time each front at every site, and fit its speed and direction.
    Analyze(AnalyzeArgs),
    /// Analyse every recording of a study manifest (CSV: recording, data, layout and your own
    /// columns); write each recording's files in its own folder and the study's tables.
    Batch(BatchArgs),
    /// Join the output folders of `batch --shard` runs into the study's tables.
    Combine(CombineArgs),
    /// Compare the conditions of a study (the folder `batch` or `combine` wrote, or a
    /// manifest, analysed first): every metric's effect with its 95% interval at the level of the replication unit, then the
    /// test; writes comparisons.csv.
    Compare(CompareArgs),
    /// Read a study's block series (recordings analysed with --stimuli, at levels of a
    /// synaptic blocker) as percolation: the network threshold, the ignition fraction and the
    /// giant component per level; writes percolation.csv and its figures.
    Percolation(PercolationArgs),
    /// Simulate a recording with known fronts from a scenario file (JSON); write spikes.csv,
    /// layout.csv and truth.json into a folder (network cultures also traces.csv and
    /// roi_layout.csv when imaged, voltage.raw and voltage.json when asked, stimuli.csv when
    /// stimulated).
    Simulate(SimulateArgs),
}

#[derive(Args, Debug)]
struct AnalyzeArgs {
    /// Spike list (site, time_s|time_ms|time_us), CSV or TSV; or raw voltage: a WAV file, or
    /// interleaved int16/float32 samples with a sidecar (RECORDING.json or STEM.json).
    recording: String,
    /// Layout file: site, x_um, y_um (or x_mm, y_mm).
    #[arg(long)]
    layout: String,
    /// Print one JSON document on stdout instead of text.
    #[arg(long)]
    json: bool,
    /// Write the output files into this folder: bursts.csv, fronts.csv, activation.csv,
    /// leaders.csv, spectrum.csv, sttc.csv, lags.csv, sites.csv, summary.json (electrodes.csv
    /// for raw voltage; responses.csv and curves.csv with --stimuli).
    #[arg(long, value_name = "DIR")]
    out: Option<String>,
    /// Ground truth of a simulated recording (the truth.json of `ringline simulate`): each
    /// true front is set beside the measured one.
    #[arg(long, value_name = "FILE")]
    truth: Option<String>,
    /// Stimulus protocol (time_s, amplitude_V or mV, V_per_m, uA, mA; optional site and
    /// label): which sites responded to each stimulus, and the response curves with their
    /// cumulative-Gaussian fits (adds responses.csv and curves.csv).
    #[arg(long, value_name = "FILE")]
    stimuli: Option<String>,
    /// Write one self-contained HTML report (inputs with SHA-256, every setting, the summary,
    /// every figure, the notices, every front): it opens from disk with no script and prints
    /// on A4 or Letter. The page's "Save report" writes the same bytes.
    #[arg(long, value_name = "FILE")]
    report: Option<String>,
    #[command(flatten)]
    pipeline: PipelineArgs,
}

#[derive(Args, Debug)]
struct BatchArgs {
    /// Study manifest: one row per recording; paths relative to the manifest's folder.
    manifest: String,
    /// Folder to write into: recordings/NAME/ per recording, and status.csv, recordings.csv,
    /// bursts.csv, fronts.csv for the study.
    #[arg(long, value_name = "DIR")]
    out: String,
    /// Run only the I-th of N equal shares of the manifest (from 1); join the shares'
    /// folders afterwards with `ringline combine`.
    #[arg(long, value_name = "I/N")]
    shard: Option<String>,
    /// Recordings analysed at once [default: one per core].
    #[arg(long, value_name = "N")]
    jobs: Option<usize>,
    #[command(flatten)]
    pipeline: PipelineArgs,
}

#[derive(Args, Debug)]
struct CombineArgs {
    /// Output folders of `ringline batch --shard` runs of the same manifest.
    #[arg(required = true)]
    dirs: Vec<String>,
    /// Folder for the study's tables.
    #[arg(long, value_name = "DIR")]
    out: String,
}

#[derive(Args, Debug)]
struct CompareArgs {
    /// A study folder written by `ringline batch` or `ringline combine` (with recordings.csv),
    /// its recordings.csv, or a study manifest: its recordings are analysed first (as
    /// `batch`, into --out) and then compared.
    study: String,
    /// The manifest column that names the condition.
    #[arg(long)]
    by: String,
    /// The manifest column of the replication unit (culture, well) [default: each recording].
    #[arg(long)]
    unit: Option<String>,
    /// The same units were recorded in every condition (paired differences).
    #[arg(long)]
    paired: bool,
    /// Metrics to compare, comma-separated: columns of recordings.csv (one value per
    /// recording), of fronts.csv such as speed_mm_s (every front) or of bursts.csv such as
    /// recruit_90_ms (every burst), the last two nested in recordings and units [default:
    /// median speed, direction balance, burst rate, interburst interval and its CV, share
    /// reaching the end, mean STTC, Kuramoto R].
    #[arg(long, value_delimiter = ',')]
    metrics: Vec<String>,
    /// Multiplicity adjustment over all comparisons.
    #[arg(long, value_enum, default_value = "holm")]
    adjust: AdjustArg,
    /// Folder for comparisons.csv and the figures [default: the study folder]; for a
    /// manifest, also the study's files (required).
    #[arg(long, value_name = "DIR")]
    out: Option<String>,
    /// Print one JSON document on stdout instead of text.
    #[arg(long)]
    json: bool,
    /// Write one self-contained HTML study report (the study tables' SHA-256, every setting,
    /// the comparisons, the estimation plots and level curves, the recordings, what was left
    /// out); the page's "Save the study report" writes the same bytes.
    #[arg(long, value_name = "FILE")]
    report: Option<String>,
    /// Recordings analysed at once when STUDY is a manifest [default: one per core].
    #[arg(long, value_name = "N")]
    jobs: Option<usize>,
    #[command(flatten, next_help_heading = "Analysis (when STUDY is a manifest)")]
    pipeline: PipelineArgs,
}

#[derive(Args, Debug)]
struct PercolationArgs {
    /// A study folder written by `ringline batch` (recordings.csv, and recordings/NAME/
    /// curves.csv for every recording analysed with stimuli).
    study: String,
    /// The manifest column of the block level (a blocker's concentration, in order).
    #[arg(long)]
    by: String,
    /// The fully blocked level: its curve is the disconnected one [default: the last level,
    /// the highest when the levels are numbers].
    #[arg(long, value_name = "LEVEL")]
    blocked: Option<String>,
    /// Folder for percolation.csv and the figures [default: the study folder].
    #[arg(long, value_name = "DIR")]
    out: Option<String>,
    /// Print one JSON document on stdout instead of text.
    #[arg(long)]
    json: bool,
}

fn percolation(args: &PercolationArgs) -> Result<i32, Failure> {
    let folder = std::path::Path::new(&args.study);
    let table = folder.join("recordings.csv");
    let text = read_text(&table.to_string_lossy(), "study table")?;
    let mut curves = Vec::new();
    if let Ok(entries) = std::fs::read_dir(folder.join(crate::study::RECORDINGS_FOLDER)) {
        let mut paths: Vec<std::path::PathBuf> = entries.flatten().map(|e| e.path()).collect();
        paths.sort();
        for dir in paths {
            let file = dir.join("curves.csv");
            if file.is_file() {
                let name = dir
                    .file_name()
                    .map(|n| n.to_string_lossy().into_owned())
                    .unwrap_or_default();
                curves.push((name, read_text(&file.to_string_lossy(), "curves table")?));
            }
        }
    }
    let series =
        crate::study::percolation::block_series(&text, &curves, &args.by, args.blocked.as_deref())
            .map_err(|e| Failure::Input(e.to_string()))?;
    let out = args
        .out
        .as_ref()
        .map_or(folder.to_path_buf(), std::path::PathBuf::from);
    std::fs::create_dir_all(&out).map_err(Failure::Output)?;
    let files = crate::report::response_figures::percolation_output_files(&series);
    for (name, text) in &files {
        std::fs::write(out.join(name), text).map_err(Failure::Output)?;
    }
    if args.json {
        println!(
            "{}",
            serde_json::to_string_pretty(&series).unwrap_or_default()
        );
    } else {
        print!("{}", series.to_text());
    }
    let names: Vec<&str> = files.iter().map(|f| f.0.as_str()).collect();
    eprintln!("wrote {} to {}", names.join(", "), out.display());
    Ok(0)
}

#[derive(clap::ValueEnum, Clone, Copy, Debug)]
#[value(rename_all = "snake_case")]
enum AdjustArg {
    /// Holm: the family-wise error rate.
    Holm,
    /// Benjamini-Hochberg: the false discovery rate.
    #[value(alias = "bh")]
    BenjaminiHochberg,
}

/// Whether a CSV file is a study manifest (it names each recording's data file) rather than
/// a study's recordings.csv (which has an outcome per recording).
fn is_manifest(path: &std::path::Path) -> bool {
    let Ok(text) = std::fs::read(path) else {
        return false;
    };
    let mut reader = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .from_reader(text.as_slice());
    reader.headers().is_ok_and(|h| {
        let has = |name: &str| h.iter().any(|c| c.trim().eq_ignore_ascii_case(name));
        has("data") && !has("outcome")
    })
}

fn compare(args: &CompareArgs) -> Result<i32, Failure> {
    let path = std::path::Path::new(&args.study);
    // The study's recordings.csv, the folder it lies in, and the batch run's exit code.
    let (table, folder, analysed) = if path.is_dir() {
        (path.join("recordings.csv"), path.to_path_buf(), 0)
    } else if is_manifest(path) {
        let Some(out) = &args.out else {
            return Err(Failure::Input(format!(
                "{}: a manifest is analysed before its conditions are compared; give --out DIR for the study's files",
                args.study
            )));
        };
        if args.jobs == Some(0) {
            return Err(Failure::Input("--jobs: expected at least 1".into()));
        }
        let code = batch::batch(&batch::BatchJob {
            manifest_path: args.study.clone(),
            out: out.clone(),
            settings: args.pipeline.settings()?,
            wav_uv_per_unit: args.pipeline.voltage.uv_per_unit,
            shard: None,
            jobs: args.jobs,
        })?;
        let folder = std::path::PathBuf::from(out);
        (folder.join("recordings.csv"), folder, code)
    } else {
        let folder = path.parent().map(|p| p.to_path_buf()).unwrap_or_default();
        (path.to_path_buf(), folder, 0)
    };
    let text = read_text(&table.to_string_lossy(), "study table")?;
    let settings = crate::study::compare::CompareSettings {
        by: args.by.clone(),
        unit: args.unit.clone(),
        paired: args.paired,
        metrics: args.metrics.clone(),
        adjustment: match args.adjust {
            AdjustArg::Holm => crate::study::inference::Adjustment::Holm,
            AdjustArg::BenjaminiHochberg => crate::study::inference::Adjustment::BenjaminiHochberg,
        },
        ..Default::default()
    };
    // Metrics per front or burst come from the study's tables beside recordings.csv.
    let beside = |name: &str| -> Result<Option<String>, Failure> {
        let p = table.with_file_name(name);
        p.is_file()
            .then(|| read_text(&p.to_string_lossy(), "study table"))
            .transpose()
    };
    let (fronts, bursts) = (beside("fronts.csv")?, beside("bursts.csv")?);
    let texts = crate::study::compare::StudyTexts {
        recordings: &text,
        fronts: fronts.as_deref(),
        bursts: bursts.as_deref(),
    };
    let report = crate::study::compare::compare(texts, &settings)
        .map_err(|e| Failure::Input(e.to_string()))?;
    let out = args.out.as_ref().map_or(folder, std::path::PathBuf::from);
    std::fs::create_dir_all(&out).map_err(Failure::Output)?;
    let files = crate::report::compare_figures::compare_output_files(&report);
    for (name, text) in &files {
        std::fs::write(out.join(name), text).map_err(Failure::Output)?;
    }
    if let Some(path) = &args.report {
        let document = crate::report::study_document::study_document(&report, &texts, &files);
        std::fs::write(path, document.to_html()).map_err(Failure::Output)?;
        eprintln!("wrote the study report to {path}");
    }
    if args.json {
        println!("{}", report.to_json());
    } else {
        print!("{}", report.to_text());
    }
    let names: Vec<&str> = files.iter().map(|f| f.0.as_str()).collect();
    eprintln!("wrote {} to {}", names.join(", "), out.display());
    // Recordings that failed are left out of the comparison (and listed); the exit code
    // still says so.
    Ok(analysed)
}

/// Every setting of one recording's path from files to results (analyze and batch).
#[derive(Args, Debug)]
struct PipelineArgs {
    #[command(flatten)]
    analysis: AnalysisArgs,
    #[command(flatten)]
    read: ReadArgs,
    #[command(flatten)]
    track: TrackArgs,
    #[command(flatten)]
    voltage: VoltageArgs,
}

impl PipelineArgs {
    fn settings(&self) -> Result<RecordingSettings, Failure> {
        Ok(RecordingSettings {
            read: read_options(&self.read),
            track: track_settings(&self.track)?,
            voltage: voltage_settings(&self.voltage)?,
            analysis: analysis_settings(&self.analysis)?,
        })
    }
}

/// Settings of the analysis.
#[derive(Args, Debug)]
struct AnalysisArgs {
    /// Analysis settings as JSON (any subset of the keys in the report's "settings").
    #[arg(long, value_name = "FILE")]
    settings: Option<String>,
    /// Network-burst detector.
    #[arg(long, value_enum)]
    detector: Option<DetectorArg>,
    /// Estimator of the time-position fit.
    #[arg(long, value_enum)]
    estimator: Option<EstimatorArg>,
    /// Bootstrap resamples over sites per front (at least 100).
    #[arg(long, value_name = "N")]
    resamples: Option<usize>,
    /// Seed of the bootstrap generator.
    #[arg(long, value_name = "N")]
    seed: Option<u64>,
}

/// Spike detection on raw voltage (ignored for spike lists).
#[derive(Args, Debug)]
struct VoltageArgs {
    /// Band-pass edges in Hz, as LOW,HIGH [default: 300,3000].
    #[arg(long, value_name = "LOW,HIGH")]
    band: Option<String>,
    /// Butterworth order of the band-pass prototype [default: 3].
    #[arg(long, value_name = "N")]
    filter_order: Option<usize>,
    /// Spike threshold in noise SDs (MAD estimate) [default: 5].
    #[arg(long, value_name = "K")]
    threshold_sd: Option<f64>,
    /// Which excursions are spikes [default: negative].
    #[arg(long, value_enum)]
    polarity: Option<PolarityArg>,
    /// Dead time after a spike, ms [default: 1].
    #[arg(long, value_name = "MS")]
    dead_time_ms: Option<f64>,
    /// Microvolts per stored unit of a WAV file (WAV carries no scale) [default: 1].
    #[arg(long, value_name = "UV")]
    uv_per_unit: Option<f64>,
}

#[derive(ValueEnum, Clone, Copy, Debug)]
enum PolarityArg {
    Negative,
    Positive,
    Both,
}

/// The choices of the command line are spelt as in the settings JSON and the page.
#[derive(ValueEnum, Clone, Copy, Debug)]
#[value(rename_all = "snake_case")]
enum DetectorArg {
    /// Thresholded population rate.
    #[value(alias = "rate")]
    PopulationRate,
    /// Per-site ISI_N bursts joined across sites.
    #[value(alias = "isi-n")]
    IsiN,
}

#[derive(ValueEnum, Clone, Copy, Debug)]
#[value(rename_all = "snake_case")]
enum EstimatorArg {
    /// Theil-Sen: the median of pairwise slopes.
    #[value(alias = "theil-sen")]
    TheilSen,
    /// Huber M-estimation by IRLS.
    Huber,
    /// Ordinary least squares.
    Ols,
}

#[derive(Args, Debug)]
struct SimulateArgs {
    /// Scenario file (JSON), for example one of demo-data/scenarios/. Without it, a spiking
    /// network culture is built from the culture options below and its scenario is written
    /// to the output folder as scenario.json.
    scenario: Option<String>,
    /// Folder to write into (created if missing).
    #[arg(long)]
    out: String,
    /// Replace the scenario's seed.
    #[arg(long, value_name = "N")]
    seed: Option<u64>,
    /// Replace the scenario's duration, seconds.
    #[arg(long, value_name = "S")]
    duration: Option<f64>,
    /// Instead of simulating, wire the culture at each of these mean in-degrees (comma-separated,
    /// e.g. 0.5,1,2,4,8) and report its connected components; writes connectivity.csv and
    /// connectivity.svg (giant component against K).
    #[arg(long, value_name = "K,K,...", value_delimiter = ',')]
    in_degree_sweep: Option<Vec<f64>>,
    #[command(flatten)]
    culture: CultureArgs,
}

/// A network culture from options (used when no scenario file is given).
#[derive(Args, Debug)]
struct CultureArgs {
    /// Culture pattern (default strip).
    #[arg(long, value_enum, help_heading = "Culture (without a scenario file)")]
    pattern: Option<PatternArg>,
    /// Strip length or square dish side, µm [6000 for a strip, 2000 for a dish].
    #[arg(
        long,
        value_name = "UM",
        help_heading = "Culture (without a scenario file)"
    )]
    length_um: Option<f64>,
    /// Strip or ring width, µm [300].
    #[arg(
        long,
        value_name = "UM",
        help_heading = "Culture (without a scenario file)"
    )]
    width_um: Option<f64>,
    /// Ring mid-radius or round dish radius, µm [1500 for a ring, 1000 for a disk].
    #[arg(
        long,
        value_name = "UM",
        help_heading = "Culture (without a scenario file)"
    )]
    radius_um: Option<f64>,
    /// Neurons per mm² [1500].
    #[arg(
        long,
        value_name = "N",
        help_heading = "Culture (without a scenario file)"
    )]
    density: Option<f64>,
    /// Mean inputs per neuron [100].
    #[arg(
        long,
        value_name = "K",
        help_heading = "Culture (without a scenario file)"
    )]
    in_degree: Option<f64>,
    /// Length of the Gaussian connection footprint, µm [150].
    #[arg(
        long,
        value_name = "UM",
        help_heading = "Culture (without a scenario file)"
    )]
    sigma_um: Option<f64>,
    /// Electrodes: a row, a circle or a square grid (a square number) [16, 24, 64]; 0 for none.
    #[arg(
        long,
        value_name = "N",
        help_heading = "Culture (without a scenario file)"
    )]
    electrodes: Option<usize>,
    /// ROIs of calcium imaging at 20 frames/s [none].
    #[arg(
        long,
        value_name = "N",
        help_heading = "Culture (without a scenario file)"
    )]
    rois: Option<usize>,
}

impl CultureArgs {
    fn any(&self) -> bool {
        self.pattern.is_some()
            || self.length_um.is_some()
            || self.width_um.is_some()
            || self.radius_um.is_some()
            || self.density.is_some()
            || self.in_degree.is_some()
            || self.sigma_um.is_some()
            || self.electrodes.is_some()
            || self.rois.is_some()
    }
}

#[derive(Clone, Copy, Debug, ValueEnum)]
enum PatternArg {
    Strip,
    Ring,
    Dish,
    Disk,
}

#[derive(Args, Debug)]
struct InspectArgs {
    /// Spike list (site, time_s|time_ms|time_us) or ROI traces (time_s, one column per ROI), CSV or TSV.
    recording: String,
    /// Layout file: site, x_um, y_um (or x_mm, y_mm).
    #[arg(long)]
    layout: String,
    /// Print one JSON document on stdout instead of text.
    #[arg(long)]
    json: bool,
    #[command(flatten)]
    read: ReadArgs,
    #[command(flatten)]
    track: TrackArgs,
}

#[derive(Args, Debug)]
struct ReadArgs {
    /// What the recording file holds (detected from its header by default).
    #[arg(long, value_enum)]
    kind: Option<KindArg>,
    /// Unit of a time column named plainly `time`.
    #[arg(long, value_enum)]
    time_unit: Option<TimeUnitArg>,
    /// Unit of position columns named plainly `x`, `y`.
    #[arg(long, value_enum)]
    length_unit: Option<LengthUnitArg>,
    /// Frames per second, for ROI traces without a time column.
    #[arg(long, value_name = "HZ")]
    frame_rate: Option<f64>,
    /// Largest accepted number of data rows per file.
    #[arg(long, value_name = "N")]
    max_rows: Option<usize>,
    /// Largest accepted file size, in MiB.
    #[arg(long, value_name = "MIB")]
    max_mib: Option<usize>,
}

#[derive(Args, Debug)]
struct TrackArgs {
    /// Track kind; `auto` detects it from the site positions.
    #[arg(long, value_enum, default_value_t = TrackArg::Auto)]
    track: TrackArg,
    /// Ring centre in micrometres, as X,Y (fitted when absent).
    #[arg(long, value_name = "X,Y", allow_hyphen_values = true)]
    ring_centre: Option<String>,
    /// Ring radius in micrometres (needs --ring-centre).
    #[arg(long, value_name = "UM")]
    ring_radius: Option<f64>,
    /// Polyline waypoints in micrometres, as X,Y;X,Y;...
    #[arg(long, value_name = "X,Y;X,Y;...", allow_hyphen_values = true)]
    waypoints: Option<String>,
    /// Site at the start of the track (line: picks the end; ring: where the coordinate is 0).
    #[arg(long, value_name = "SITE")]
    start_site: Option<String>,
    /// Flip the direction of increasing track coordinate (clockwise on a ring).
    #[arg(long)]
    reverse: bool,
}

#[derive(ValueEnum, Clone, Copy, Debug)]
enum KindArg {
    Spikes,
    Traces,
}

#[derive(ValueEnum, Clone, Copy, Debug)]
enum TimeUnitArg {
    S,
    Ms,
    Us,
}

#[derive(ValueEnum, Clone, Copy, Debug)]
enum LengthUnitArg {
    Um,
    Mm,
}

#[derive(ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
enum TrackArg {
    Auto,
    Line,
    Polyline,
    Ring,
    Plane,
}

/// Runs the command line with `args` (program name first) and returns the exit code.
pub fn run(args: impl IntoIterator<Item = OsString>) -> i32 {
    let cli = match Cli::try_parse_from(args) {
        Ok(cli) => cli,
        Err(e) => {
            let _ = e.print();
            return if e.use_stderr() { EXIT_BAD_INPUT } else { 0 };
        }
    };
    let result = match cli.command {
        Command::Inspect(args) => inspect(&args),
        Command::Analyze(args) => analyze(&args),
        Command::Simulate(args) => simulate(&args),
        Command::Batch(args) => return finish(run_batch(&args)),
        Command::Combine(args) => return finish(batch::combine(&args.dirs, &args.out)),
        Command::Compare(args) => return finish(compare(&args)),
        Command::Percolation(args) => return finish(percolation(&args)),
    };
    finish(result.map(|()| 0))
}

fn finish(result: Result<i32, Failure>) -> i32 {
    match result {
        Ok(code) => code,
        Err(Failure::Input(message)) => {
            eprintln!("ringline: {message}");
            EXIT_BAD_INPUT
        }
        Err(Failure::Output(e)) => {
            eprintln!("ringline: could not write the output: {e}");
            1
        }
    }
}

fn run_batch(args: &BatchArgs) -> Result<i32, Failure> {
    let shard = match &args.shard {
        Some(text) => Some(batch::Shard::parse(text).map_err(Failure::Input)?),
        None => None,
    };
    if args.jobs == Some(0) {
        return Err(Failure::Input("--jobs: expected at least 1".into()));
    }
    batch::batch(&batch::BatchJob {
        manifest_path: args.manifest.clone(),
        out: args.out.clone(),
        settings: args.pipeline.settings()?,
        wav_uv_per_unit: args.pipeline.voltage.uv_per_unit,
        shard,
        jobs: args.jobs,
    })
}

enum Failure {
    /// The user's files or arguments; the message names the place.
    Input(String),
    Output(std::io::Error),
}

impl From<crate::Error> for Failure {
    fn from(e: crate::Error) -> Self {
        Failure::Input(e.to_string())
    }
}

impl From<ImportError> for Failure {
    fn from(e: ImportError) -> Self {
        Failure::Input(e.to_string())
    }
}

fn inspect(args: &InspectArgs) -> Result<(), Failure> {
    let read = read_options(&args.read);
    let track = track_settings(&args.track)?;
    let activity = read_file(&args.recording, &read.limits)?;
    let layout = read_file(&args.layout, &read.limits)?;
    let report = crate::inspect_files(
        (&args.recording, &activity),
        (&args.layout, &layout),
        &read,
        &track,
    )?;
    let text = if args.json {
        serde_json::to_string_pretty(&report).map_err(|e| Failure::Output(e.into()))? + "\n"
    } else {
        report.to_text()
    };
    print(&text)
}

/// Writes the command's result to stdout.
fn print(text: &str) -> Result<(), Failure> {
    std::io::stdout()
        .lock()
        .write_all(text.as_bytes())
        .map_err(Failure::Output)
}

fn analysis_settings(args: &AnalysisArgs) -> Result<crate::fronts::AnalysisSettings, Failure> {
    use crate::detect::BurstDetector;
    use crate::fronts::{AnalysisSettings, Estimator};
    let mut settings = match &args.settings {
        Some(path) => {
            let text = read_text(path, "JSON text")?;
            crate::study::analysis_settings_over(&AnalysisSettings::default(), path, &text)
                .map_err(|e| Failure::Input(e.to_string()))?
        }
        None => AnalysisSettings::default(),
    };
    if let Some(d) = args.detector {
        settings.bursts.detector = match d {
            DetectorArg::PopulationRate => BurstDetector::PopulationRate,
            DetectorArg::IsiN => BurstDetector::IsiN,
        };
    }
    if let Some(e) = args.estimator {
        settings.fronts.estimator = match e {
            EstimatorArg::TheilSen => Estimator::TheilSen,
            EstimatorArg::Huber => Estimator::Huber,
            EstimatorArg::Ols => Estimator::Ols,
        };
    }
    if let Some(n) = args.resamples {
        settings.fronts.resamples = n;
    }
    if let Some(seed) = args.seed {
        settings.fronts.seed = seed;
    }
    Ok(settings)
}

fn analyze(args: &AnalyzeArgs) -> Result<(), Failure> {
    use std::io::IsTerminal;
    let show_progress = std::io::stderr().is_terminal();
    let recording = args.pipeline.settings()?;
    let mut progress = |stage: &str, done: u64, total: u64| {
        if show_progress && (done == total || done % 10 == 0 || stage.starts_with("detect")) {
            eprint!("\r{stage}: {done}/{total}   ");
            if done == total {
                eprintln!();
            }
        }
    };
    let report = match &args.report {
        // The report needs the page's figures, so this run goes through the workbook.
        Some(path) => {
            let settings = crate::report::workbook::StepSettings {
                read: recording.read.clone(),
                voltage: recording.voltage.clone(),
                voltage_wav_uv_per_unit: args.pipeline.voltage.uv_per_unit,
                track: recording.track.clone(),
                analysis: recording.analysis.clone(),
                view: Default::default(),
            };
            let mut workbook = open_paths(
                &args.recording,
                &args.layout,
                args.stimuli.as_deref(),
                &recording.read.limits,
                args.pipeline.voltage.uv_per_unit,
                &mut |file, layout, stimuli| {
                    crate::report::workbook::Workbook::analyze_file(
                        file,
                        layout,
                        stimuli,
                        settings.clone(),
                        &mut progress,
                    )
                },
            )?;
            if workbook.voltage_header().is_some() {
                workbook.set_voltage_sha256(sha256_of_path(&args.recording)?);
            }
            let document = workbook
                .report_document()
                .map_err(|e| Failure::Input(e.message))?;
            std::fs::write(path, document.to_html()).map_err(Failure::Output)?;
            eprintln!("wrote the report to {path}");
            workbook
                .report()
                .cloned()
                .ok_or_else(|| Failure::Input("the analysis gave no report".into()))?
        }
        None => analyze_paths(
            &args.recording,
            &args.layout,
            args.stimuli.as_deref(),
            &recording,
            args.pipeline.voltage.uv_per_unit,
            &mut progress,
        )?,
    };
    if let Some(dir) = &args.out {
        let names = write_outputs(std::path::Path::new(dir), &report)?;
        eprintln!("wrote {} to {dir}", names.join(", "));
    }
    let truth = match &args.truth {
        Some(path) => {
            let text = read_text(path, "JSON text")?;
            Some(
                crate::report::truth::compare_with_truth(&report, &text)
                    .map_err(|e| Failure::Input(format!("{path}: {e}")))?,
            )
        }
        None => None,
    };
    let text = if args.json {
        let mut value = serde_json::to_value(&report).map_err(|e| Failure::Output(e.into()))?;
        if let (Some(t), Some(map)) = (&truth, value.as_object_mut()) {
            map.insert(
                "truth".into(),
                serde_json::to_value(t).map_err(|e| Failure::Output(e.into()))?,
            );
        }
        serde_json::to_string(&value).map_err(|e| Failure::Output(e.into()))? + "\n"
    } else {
        let mut text = String::new();
        if let Some(rows) = &report.electrodes {
            text.push_str(&crate::report::electrodes_text(rows));
        }
        text.push_str(&report.to_text());
        if let Some(t) = &truth {
            text.push('\n');
            text.push_str(&t.to_text());
        }
        text
    };
    print(&text)
}

/// Reads a recording from paths: raw voltage in blocks (a WAV file, or raw samples with the
/// sidecar that [`crate::import::sidecar_names`] finds), anything else whole. The one path of
/// `analyze` and `batch`.
fn analyze_paths(
    data: &str,
    layout: &str,
    stimuli: Option<&str>,
    settings: &RecordingSettings,
    wav_uv_per_unit: Option<f64>,
    progress: &mut dyn FnMut(&str, u64, u64),
) -> Result<AnalysisReport, Failure> {
    open_paths(
        data,
        layout,
        stimuli,
        &settings.read.limits,
        wav_uv_per_unit,
        &mut |file, layout, stimuli| crate::analyze_file(file, layout, stimuli, settings, progress),
    )
}

/// SHA-256 of a file, read in 1 MiB pieces (raw voltage can be gigabytes).
fn sha256_of_path(path: &str) -> Result<String, Failure> {
    use sha2::Digest;
    use std::io::Read;
    let mut file = std::fs::File::open(path).map_err(Failure::Output)?;
    let mut hasher = sha2::Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    loop {
        let n = file.read(&mut buf).map_err(Failure::Output)?;
        if n == 0 {
            break;
        }
        hasher.update(&buf[..n]);
    }
    Ok(hasher
        .finalize()
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect())
}

/// What is done with one recording's opened files: (activity, layout, stimulus protocol).
type OpenedFiles<'r, T> = dyn FnMut(crate::ActivityFile<'_>, (&str, &[u8]), Option<(&str, &[u8])>) -> Result<T, crate::Error>
    + 'r;

/// Opens the files of one recording from paths and hands them to `run`: the activity file as
/// an [`crate::ActivityFile`] (read in blocks), the layout and the stimulus protocol whole.
fn open_paths<T>(
    data: &str,
    layout: &str,
    stimuli: Option<&str>,
    limits: &ImportLimits,
    wav_uv_per_unit: Option<f64>,
    run: &mut OpenedFiles<'_, T>,
) -> Result<T, Failure> {
    use std::io::{Read, Seek, SeekFrom};
    let layout_bytes = read_file(layout, limits)?;
    let stimuli = match stimuli {
        Some(name) => Some((name, read_file(name, limits)?)),
        None => None,
    };
    let fail = |e: std::io::Error| {
        ImportError::new(Place::file(data), ImportProblem::BadOption, io_words(&e))
    };
    let mut file = std::fs::File::open(data).map_err(fail)?;
    let len = file.metadata().map_err(fail)?.len();
    let mut head = vec![0u8; 65_536.min(len as usize)];
    file.read_exact(&mut head).map_err(fail)?;
    let sidecar = match crate::import::classify_input(data, &head) {
        crate::import::InputKind::VoltageSamples => {
            match crate::import::sidecar_names(data)
                .into_iter()
                .find(|n| std::path::Path::new(n).is_file())
            {
                Some(name) => {
                    let bytes = read_file(&name, &ImportLimits::default())?;
                    Some((name, bytes))
                }
                None => None,
            }
        }
        _ => None,
    };
    let mut read = |from: u64, to: u64| -> Result<Vec<u8>, ImportError> {
        let mut buf = vec![0u8; (to - from) as usize];
        file.seek(SeekFrom::Start(from))
            .and_then(|_| file.read_exact(&mut buf))
            .map_err(|e| {
                ImportError::new(Place::file(data), ImportProblem::BadValue, io_words(&e))
            })?;
        Ok(buf)
    };
    Ok(run(
        crate::ActivityFile {
            name: data,
            len,
            head: &head,
            read: &mut read,
            sidecar: sidecar.as_ref().map(|(n, b)| (n.as_str(), b.as_slice())),
            wav_uv_per_unit: wav_uv_per_unit.unwrap_or(1.0),
        },
        (layout, &layout_bytes),
        stimuli.as_ref().map(|(n, b)| (*n, b.as_slice())),
    )?)
}

/// Writes a report's output files into `dir` (created if missing); returns their names.
fn write_outputs(
    dir: &std::path::Path,
    report: &AnalysisReport,
) -> Result<Vec<&'static str>, Failure> {
    std::fs::create_dir_all(dir).map_err(Failure::Output)?;
    let files = report.output_files();
    for (name, content) in &files {
        std::fs::write(dir.join(name), content).map_err(Failure::Output)?;
    }
    Ok(files.iter().map(|f| f.0).collect())
}

fn voltage_settings(
    args: &VoltageArgs,
) -> Result<crate::detect::voltage::VoltageSettings, Failure> {
    use crate::detect::voltage::{Polarity, VoltageSettings};
    let mut s = VoltageSettings::default();
    if let Some(band) = &args.band {
        let parts: Vec<Option<f64>> = band.split(',').map(|v| v.trim().parse().ok()).collect();
        match parts.as_slice() {
            [Some(lo), Some(hi)] => s.band_hz = [*lo, *hi],
            _ => {
                return Err(Failure::Input(format!(
                    "--band: expected two numbers in Hz as LOW,HIGH, found {band}"
                )))
            }
        }
    }
    if let Some(n) = args.filter_order {
        s.filter_order = n;
    }
    if let Some(k) = args.threshold_sd {
        s.threshold_sd = k;
    }
    if let Some(p) = args.polarity {
        s.polarity = match p {
            PolarityArg::Negative => Polarity::Negative,
            PolarityArg::Positive => Polarity::Positive,
            PolarityArg::Both => Polarity::Both,
        };
    }
    if let Some(ms) = args.dead_time_ms {
        s.dead_time_s = ms / 1000.0;
    }
    Ok(s)
}

/// What `simulate` runs: a scenario file, or a culture from options.
enum Source {
    File(crate::simulate::Scenario),
    Options(crate::simulate::network::CultureOptions),
}

fn simulate(args: &SimulateArgs) -> Result<(), Failure> {
    let (scenario, source) = match &args.scenario {
        Some(path) => {
            if args.culture.any() {
                return Err(Failure::Input(format!(
                    "{path}: give a scenario file or culture options (--pattern, --length-um, ...), not both"
                )));
            }
            let text = read_text(path, "JSON text")?;
            let mut scenario = crate::simulate::parse_scenario(&text)
                .map_err(|e| Failure::Input(format!("{path}: {e}")))?;
            match &mut scenario {
                crate::simulate::Scenario::Fronts(s) => {
                    s.seed = args.seed.unwrap_or(s.seed);
                    s.duration_s = args.duration.unwrap_or(s.duration_s);
                }
                crate::simulate::Scenario::Network(s) => {
                    s.seed = args.seed.unwrap_or(s.seed);
                    s.duration_s = args.duration.unwrap_or(s.duration_s);
                }
            }
            (Source::File(scenario), path.clone())
        }
        None => {
            let c = &args.culture;
            let options = crate::simulate::network::CultureOptions {
                shape: match c.pattern.unwrap_or(PatternArg::Strip) {
                    PatternArg::Strip => crate::simulate::network::CultureShape::Strip,
                    PatternArg::Ring => crate::simulate::network::CultureShape::Ring,
                    PatternArg::Dish => crate::simulate::network::CultureShape::Dish,
                    PatternArg::Disk => crate::simulate::network::CultureShape::Disk,
                },
                length_um: c.length_um,
                width_um: c.width_um,
                radius_um: c.radius_um,
                density_per_mm2: c.density,
                mean_in_degree: c.in_degree,
                sigma_um: c.sigma_um,
                electrodes: c.electrodes,
                rois: c.rois.unwrap_or(0),
                duration_s: args
                    .duration
                    .unwrap_or(crate::simulate::network::CULTURE_DURATION_S),
                seed: args.seed.unwrap_or(crate::simulate::network::CULTURE_SEED),
            };
            // Checked here, so that a bad option is refused before anything runs.
            crate::simulate::network::scenario_from_options(&options).map_err(Failure::Input)?;
            (Source::Options(options), "culture options".to_string())
        }
    };
    use std::io::IsTerminal;
    let show = std::io::stderr().is_terminal();
    if let Some(in_degrees) = &args.in_degree_sweep {
        let network = match &scenario {
            Source::File(crate::simulate::Scenario::Network(s)) => (**s).clone(),
            Source::File(crate::simulate::Scenario::Fronts(_)) => {
                return Err(Failure::Input(format!(
                    "{source}: --in-degree-sweep needs a spiking network scenario (\"model\": \"network\"), not a kinematic one"
                )))
            }
            Source::Options(o) => crate::simulate::network::scenario_from_options(o)
                .map_err(Failure::Input)?,
        };
        return in_degree_sweep(&network, in_degrees, &source, &args.out, show);
    }
    let mut progress = |stage: &str, done: f64, total: f64| {
        if show {
            eprint!("\r{stage}: {done:.0} of {total:.0} s simulated   ");
        }
    };
    let output = match &scenario {
        Source::File(s) => crate::simulate::simulation_files(s, &mut progress),
        Source::Options(o) => crate::simulate::culture_files(o, &mut progress),
    }
    .map_err(|e| Failure::Input(format!("{source}: {e}")))?;
    if show {
        eprintln!();
    }
    for notice in &output.notices {
        eprintln!("notice: {notice}");
    }
    let files = output.files;
    let out = std::path::Path::new(&args.out);
    std::fs::create_dir_all(out).map_err(Failure::Output)?;
    for (name, content) in files {
        let path = out.join(&name);
        std::fs::write(&path, content).map_err(Failure::Output)?;
        eprintln!("wrote {}", path.display());
    }
    Ok(())
}

/// `ringline simulate --in-degree-sweep`: prints a table and writes connectivity.csv and
/// connectivity.svg.
fn in_degree_sweep(
    scenario: &crate::simulate::network::NetworkScenario,
    in_degrees: &[f64],
    source: &str,
    out: &str,
    show: bool,
) -> Result<(), Failure> {
    use crate::simulate::network;
    let points = network::in_degree_sweep(scenario, in_degrees, &mut |done, total| {
        if show {
            eprint!("\rwiring: {done} of {total} in-degrees   ");
        }
    })
    .map_err(|e| Failure::Input(format!("{source}: {e}")))?;
    if show {
        eprintln!();
    }
    println!("target K   mean in-degree   synapses   components   giant component");
    for p in &points {
        let g = &p.graph;
        println!(
            "{:>8}   {:>14.2}   {:>8}   {:>10}   {:>15.3}",
            p.target_in_degree,
            g.mean_in_degree,
            g.synapses,
            g.components,
            g.giant_component_fraction
        );
    }
    let figure = crate::report::figures::in_degree_sweep(
        &points
            .iter()
            .map(|p| p.target_in_degree)
            .collect::<Vec<_>>(),
        &points
            .iter()
            .map(|p| p.graph.giant_component_fraction)
            .collect::<Vec<_>>(),
        &points.iter().map(|p| p.describe()).collect::<Vec<_>>(),
        crate::report::figures::Size::default(),
    )
    .map_err(|e| Failure::Input(format!("{source}: {e}")))?;
    let dir = std::path::Path::new(out);
    std::fs::create_dir_all(dir).map_err(Failure::Output)?;
    for (name, content) in [
        ("connectivity.csv", network::in_degree_sweep_csv(&points)),
        ("connectivity.svg", figure.svg),
    ] {
        let path = dir.join(name);
        std::fs::write(&path, content).map_err(Failure::Output)?;
        eprintln!("wrote {}", path.display());
    }
    Ok(())
}

fn read_options(args: &ReadArgs) -> ReadOptions {
    let mut limits = ImportLimits::default();
    if let Some(rows) = args.max_rows {
        limits.max_rows = rows;
    }
    if let Some(mib) = args.max_mib {
        limits.max_bytes = mib.saturating_mul(1 << 20);
    }
    ReadOptions {
        kind: args.kind.map(|k| match k {
            KindArg::Spikes => FileKind::SpikeList,
            KindArg::Traces => FileKind::RoiTraces,
        }),
        time_unit: args.time_unit.map(|u| match u {
            TimeUnitArg::S => TimeUnit::Seconds,
            TimeUnitArg::Ms => TimeUnit::Milliseconds,
            TimeUnitArg::Us => TimeUnit::Microseconds,
        }),
        length_unit: args.length_unit.map(|u| match u {
            LengthUnitArg::Um => LengthUnit::Micrometres,
            LengthUnitArg::Mm => LengthUnit::Millimetres,
        }),
        frame_rate_hz: args.frame_rate,
        limits,
    }
}

fn track_settings(args: &TrackArgs) -> Result<TrackSettings, Failure> {
    let kind = match args.track {
        TrackArg::Auto => TrackChoice::Auto,
        TrackArg::Line => TrackChoice::Line,
        TrackArg::Polyline => TrackChoice::Polyline,
        TrackArg::Ring => TrackChoice::Ring,
        TrackArg::Plane => TrackChoice::Plane,
    };
    let ring_centre_um = match &args.ring_centre {
        Some(text) => Some(parse_point(text, "--ring-centre")?),
        None => None,
    };
    let waypoints_um = match &args.waypoints {
        Some(text) => text
            .split(';')
            .filter(|p| !p.trim().is_empty())
            .map(|p| parse_point(p, "--waypoints"))
            .collect::<Result<Vec<_>, _>>()?,
        None => Vec::new(),
    };
    if !waypoints_um.is_empty() && kind != TrackChoice::Polyline {
        return Err(Failure::Input(
            "--waypoints describe a polyline track; add --track polyline".into(),
        ));
    }
    Ok(TrackSettings {
        kind,
        ring_centre_um,
        ring_radius_um: args.ring_radius,
        waypoints_um,
        start_site: args.start_site.clone(),
        reverse: args.reverse,
        ..TrackSettings::default()
    })
}

fn parse_point(text: &str, option: &str) -> Result<[f64; 2], Failure> {
    let parts: Vec<&str> = text.split(',').map(str::trim).collect();
    match parts.as_slice() {
        [x, y] => match (x.parse::<f64>(), y.parse::<f64>()) {
            (Ok(x), Ok(y)) if x.is_finite() && y.is_finite() => Ok([x, y]),
            _ => Err(Failure::Input(format!(
                "{option}: expected two numbers in micrometres as X,Y, found '{text}'"
            ))),
        },
        _ => Err(Failure::Input(format!(
            "{option}: expected a point as X,Y in micrometres, found '{text}'"
        ))),
    }
}

/// Reads a whole text file (within the default size limit); `what` names it in the message
/// when it is not UTF-8 ("JSON text").
fn read_text(path: &str, what: &str) -> Result<String, Failure> {
    String::from_utf8(read_file(path, &ImportLimits::default())?)
        .map_err(|_| Failure::Input(format!("{path}: expected UTF-8 {what}")))
}

/// Reads a whole file, refusing one larger than the limit before reading it.
fn read_file(path: &str, limits: &ImportLimits) -> Result<Vec<u8>, Failure> {
    let place = Place::file(path);
    let meta = std::fs::metadata(path)
        .map_err(|e| ImportError::new(place.clone(), ImportProblem::BadOption, io_words(&e)))?;
    if meta.len() > limits.max_bytes as u64 {
        return Err(ImportError::new(
            place,
            ImportProblem::TooLarge,
            format!(
                "the file is {} bytes, more than the limit of {} bytes (read.limits.max_bytes); raise it with --max-mib if this file is expected",
                meta.len(),
                limits.max_bytes
            ),
        )
        .into());
    }
    std::fs::read(path)
        .map_err(|e| ImportError::new(place, ImportProblem::BadOption, io_words(&e)).into())
}

fn io_words(e: &std::io::Error) -> String {
    match e.kind() {
        std::io::ErrorKind::NotFound => "no such file".into(),
        std::io::ErrorKind::PermissionDenied => "permission denied when opening the file".into(),
        _ if e.raw_os_error() == Some(21) => "this is a folder, not a file".into(),
        _ => format!("the file cannot be read: {e}"),
    }
}
