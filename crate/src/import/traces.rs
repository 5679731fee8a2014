//! ROI fluorescence traces: one row per frame, an optional time column, one column per ROI.

use super::error::{ImportError, ImportProblem};
use super::spikes::{find_time_column, unit_words};
use super::table::{ImportLimits, Row, Table, TextSource, TimeUnit};
use crate::place::{Notice, Place};
use serde::{Deserialize, Serialize};

/// Header names taken as a frame counter, which is left out of the ROI columns.
pub const FRAME_COLUMN_NAMES: &[&str] = &["frame", "frame_index", "frame_number"];

/// Settings for reading ROI traces.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct TraceOptions {
    /// Unit of the time column when its name carries none.
    pub time_unit: Option<TimeUnit>,
    /// Frames per second; needed when the file has no time column.
    pub frame_rate_hz: Option<f64>,
    /// Size caps.
    pub limits: ImportLimits,
    /// Whether the file was taken for ROI traces by its header alone (no kind given): a
    /// text value in the first row then explains how the file was taken.
    #[serde(skip)]
    pub kind_was_guessed: bool,
}

/// Fluorescence of one ROI, one value per frame; missing values are NaN.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RoiSeries {
    /// ROI identifier: the column's header.
    pub roi: String,
    /// One value per frame, in the file's own fluorescence unit; NaN where missing.
    pub values: Vec<f64>,
}

/// A run of consecutive missing values in one ROI.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TraceGap {
    /// ROI identifier.
    pub roi: String,
    /// First and last line of the run in the file.
    pub first_line: u64,
    pub last_line: u64,
    /// Time of the first missing frame, seconds.
    pub start_s: f64,
    /// Number of missing frames.
    pub frames: usize,
}

/// ROI traces as read from a file.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RoiTraceTable {
    /// File name as given.
    pub file: String,
    /// Time of each frame, seconds, strictly increasing.
    pub time_s: Vec<f64>,
    /// One series per ROI, in column order.
    pub rois: Vec<RoiSeries>,
    /// Median interval between frames, seconds.
    pub frame_interval_s: f64,
    /// Runs of missing values, per ROI.
    pub gaps: Vec<TraceGap>,
    /// Columns that were not used as ROIs, by header name.
    pub ignored_columns: Vec<String>,
    /// What the user should know.
    pub notices: Vec<Notice>,
}

/// Reads ROI traces from the bytes of a CSV or TSV file.
///
/// The time base comes from a time column (`time_s`, `time_ms`, ...) or, when there is none,
/// from [`TraceOptions::frame_rate_hz`]. Every other column is one ROI, named by its header,
/// except a frame counter (see [`FRAME_COLUMN_NAMES`]). Empty cells, `NaN` and `NA` are
/// missing values: kept as NaN and listed in [`RoiTraceTable::gaps`].
pub fn read_roi_traces(
    bytes: &[u8],
    file: &str,
    options: &TraceOptions,
) -> Result<RoiTraceTable, ImportError> {
    read_roi_traces_with(TextSource::Bytes(bytes), file, options, &mut |_, _| {})
}

/// [`read_roi_traces`] from a [`TextSource`], telling `progress(bytes read, bytes in all)` as
/// it goes.
pub fn read_roi_traces_with(
    source: TextSource<'_>,
    file: &str,
    options: &TraceOptions,
    progress: &mut dyn FnMut(u64, u64),
) -> Result<RoiTraceTable, ImportError> {
    if let Some(rate) = options.frame_rate_hz {
        if !(rate.is_finite() && rate > 0.0) {
            return Err(ImportError::new(
                Place::file(file),
                ImportProblem::BadOption,
                format!(
                    "read.frame_rate_hz (--frame-rate): expected a frame rate above 0 frames/s, found {}",
                    crate::place::number(rate)
                ),
            ));
        }
    }
    let mut table = Table::open_source(source, file, options.limits)?.with_progress(progress);
    let time = find_time_column(
        &table,
        options.time_unit,
        options.frame_rate_hz.is_none(),
        " or a frame rate option",
    )?;
    let frame_col = table
        .headers()
        .iter()
        .position(|h| FRAME_COLUMN_NAMES.iter().any(|n| h.eq_ignore_ascii_case(n)));
    let roi_cols: Vec<usize> = (0..table.headers().len())
        .filter(|&i| Some(i) != time.map(|t| t.0) && Some(i) != frame_col)
        .collect();
    if roi_cols.is_empty() {
        return Err(ImportError::new(
            table.place_header(),
            ImportProblem::MissingColumn,
            "expected at least one ROI column besides the time column, found none",
        ));
    }
    let mut rois: Vec<RoiSeries> = roi_cols
        .iter()
        .map(|&i| RoiSeries {
            roi: table.headers()[i].clone(),
            values: Vec::new(),
        })
        .collect();
    let mut lines: Vec<u64> = Vec::new();
    let mut time_s: Vec<f64> = Vec::new();
    let mut row = Row::default();
    while let Some(next) = table.next_row(&mut row) {
        next?;
        if let Some((col, unit)) = time {
            let what = format!("a frame time in {}", unit_words(unit));
            let t = table.number(&row, col, &what)? * unit.seconds();
            if let Some(&prev) = time_s.last() {
                if t <= prev {
                    return Err(ImportError::new(
                        table.place_column(Some(row.line), col),
                        ImportProblem::BadValue,
                        format!(
                            "expected frame times that increase, found {} s after {} s",
                            crate::place::number(t),
                            crate::place::number(prev)
                        ),
                    ));
                }
            }
            time_s.push(t);
        }
        let first_row = lines.is_empty();
        for (series, &col) in rois.iter_mut().zip(&roi_cols) {
            let value = table
                .optional_number(&row, col, "a fluorescence value")
                .map_err(|mut e| {
                    // Text in the first row of a "trace" is most often a spike list whose
                    // site column has a name we do not know: say how the file was taken.
                    if first_row && options.kind_was_guessed {
                        e.message.push_str(&format!(
                            "; the file was read as ROI traces because no column is named as a site ({}): if it is a spike list, rename its site column to one of those",
                            crate::import::spikes::SITE_COLUMN_NAMES.join(", ")
                        ));
                    }
                    e
                })?
                .unwrap_or(f64::NAN);
            series.values.push(value);
        }
        lines.push(row.line);
    }
    let frames = lines.len();
    if frames == 0 {
        return Err(ImportError::new(
            Place::file(file),
            ImportProblem::NoRows,
            "the file has a header but no frames",
        ));
    }
    let mut notices = Vec::new();
    if time.is_none() {
        // Checked above: without a time column the frame rate is required.
        let rate = options.frame_rate_hz.unwrap_or(1.0);
        time_s = (0..frames).map(|i| i as f64 / rate).collect();
    }
    let frame_interval_s = median_interval(&time_s)
        .unwrap_or_else(|| options.frame_rate_hz.map_or(f64::NAN, |rate| 1.0 / rate));
    if time.is_some() && frames > 2 {
        let irregular = time_s
            .windows(2)
            .filter(|w| ((w[1] - w[0]) - frame_interval_s).abs() > 0.01 * frame_interval_s)
            .count();
        if irregular > 0 {
            notices.push(Notice::new(
                Place::file(file),
                format!("{irregular} frame intervals differ by more than 1% from the median of {frame_interval_s} s"),
            ));
        }
        if let Some(rate) = options.frame_rate_hz {
            if (rate * frame_interval_s - 1.0).abs() > 0.01 {
                notices.push(Notice::new(
                    Place::file(file),
                    format!("the frame rate option ({rate} frames/s) disagrees with the time column ({:.6} frames/s); the time column was used", 1.0 / frame_interval_s),
                ));
            }
        }
    }
    if frame_interval_s < MIN_PLAUSIBLE_FRAME_INTERVAL_S {
        notices.push(Notice::new(
            Place::file(file),
            format!(
                "frames come every {frame_interval_s:.2e} s ({:.2e} frames/s), faster than imaging records: check the unit of the time column or of --frame-rate",
                1.0 / frame_interval_s
            ),
        ));
    }
    let gaps = find_gaps(&rois, &lines, &time_s);
    for gap in &gaps {
        notices.push(Notice::new(
            Place::file(file).at_line(gap.first_line).at_site(&gap.roi),
            format!(
                "{} missing values (lines {} to {}, from {} s); kept as gaps",
                gap.frames, gap.first_line, gap.last_line, gap.start_s
            ),
        ));
    }
    let mut ignored_columns = Vec::new();
    if let Some(col) = frame_col {
        ignored_columns.push(table.headers()[col].clone());
        notices.push(Notice::new(
            table.place_column(None, col),
            "taken as a frame counter and not as an ROI",
        ));
    }
    Ok(RoiTraceTable {
        file: file.to_string(),
        time_s,
        rois,
        frame_interval_s,
        gaps,
        ignored_columns,
        notices,
    })
}

/// Below this frame interval a trace cannot come from imaging (the fastest voltage imaging
/// runs at tens of kHz; common practice, no source): a notice asks for the unit.
pub const MIN_PLAUSIBLE_FRAME_INTERVAL_S: f64 = 1e-5;

fn median_interval(time_s: &[f64]) -> Option<f64> {
    let mut diffs: Vec<f64> = time_s.windows(2).map(|w| w[1] - w[0]).collect();
    if diffs.is_empty() {
        return None;
    }
    diffs.sort_by(f64::total_cmp);
    let n = diffs.len();
    Some(if n % 2 == 1 {
        diffs[n / 2]
    } else {
        0.5 * (diffs[n / 2 - 1] + diffs[n / 2])
    })
}

fn find_gaps(rois: &[RoiSeries], lines: &[u64], time_s: &[f64]) -> Vec<TraceGap> {
    let mut gaps = Vec::new();
    for series in rois {
        let mut start: Option<usize> = None;
        for i in 0..=series.values.len() {
            let missing = series.values.get(i).is_some_and(|v| v.is_nan());
            match (missing, start) {
                (true, None) => start = Some(i),
                (false, Some(s)) => {
                    gaps.push(TraceGap {
                        roi: series.roi.clone(),
                        first_line: lines[s],
                        last_line: lines[i - 1],
                        start_s: time_s[s],
                        frames: i - s,
                    });
                    start = None;
                }
                _ => {}
            }
        }
    }
    gaps
}
