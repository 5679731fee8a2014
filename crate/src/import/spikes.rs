//! Spike lists: one row per spike, a site column and a time column.

use super::error::{ImportError, ImportProblem};
use super::table::{
    decimal_places, time_header, ImportLimits, Row, Table, TextSource, TimeUnit, UnitHeader,
};
use crate::place::{Notice, Place};
use serde::{Deserialize, Serialize};
use std::collections::HashMap;

/// Header names accepted for the site column (compared without case).
pub const SITE_COLUMN_NAMES: &[&str] = &[
    "site",
    "site_id",
    "electrode",
    "electrode_id",
    "channel",
    "channel_id",
    "roi",
    "roi_id",
];

/// Base names accepted for a time column; the unit follows as `_ms`, ` (ms)` or ` [ms]`.
pub const TIME_COLUMN_BASES: &[&str] = &["spike_time", "time", "t"];

/// Settings for reading a spike list.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct SpikeListOptions {
    /// Unit of the time column when its name carries none (`time`).
    pub time_unit: Option<TimeUnit>,
    /// Size caps.
    pub limits: ImportLimits,
}

/// Spike times of one site, in seconds, sorted ascending.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SiteSpikes {
    /// Site identifier as written in the file.
    pub site: String,
    /// Spike times in seconds, ascending.
    pub times_s: Vec<f64>,
}

/// A spike list as read from a file.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SpikeList {
    /// File name as given.
    pub file: String,
    /// One entry per site, in order of first appearance in the file.
    pub sites: Vec<SiteSpikes>,
    /// Where the latest spike kept was read (file, line, column, site), for messages about
    /// the recording's span; `None` when not read from a file.
    pub latest_place: Option<Place>,
    /// Unit the times were written in.
    pub time_unit: TimeUnit,
    /// Smallest time step the file can express, from the number of decimals written (seconds);
    /// `None` when times use exponent notation.
    pub time_quantum_s: Option<f64>,
    /// Columns that were not used, by header name.
    pub ignored_columns: Vec<String>,
    /// Number of data rows (spikes).
    pub row_count: usize,
    /// What the user should know: ignored columns, re-sorted rows, repeated times.
    pub notices: Vec<Notice>,
    /// Stimuli given in the list's own stimulus column (`stimulus_V`, ...), if it has one.
    pub stimuli: Option<super::StimulusProtocol>,
}

impl SpikeList {
    /// Total number of spikes.
    pub fn spike_count(&self) -> usize {
        self.sites.iter().map(|s| s.times_s.len()).sum()
    }
}

/// Reads a spike list from the bytes of a CSV or TSV file.
///
/// The header needs a site column (see [`SITE_COLUMN_NAMES`]) and one time column whose
/// name carries its unit (`time_s`, `time_ms`, `time_us`; or `time` with
/// [`SpikeListOptions::time_unit`]). Other columns are left out and reported. Rows need not be
/// sorted. Times must be finite and not negative.
///
/// Errors name the file, line and column, and say what was expected and what was found.
pub fn read_spike_list(
    bytes: &[u8],
    file: &str,
    options: &SpikeListOptions,
) -> Result<SpikeList, ImportError> {
    read_spike_list_with(TextSource::Bytes(bytes), file, options, &mut |_, _| {})
}

/// [`read_spike_list`] from a [`TextSource`], telling `progress(bytes read, bytes in all)` as
/// it goes.
pub fn read_spike_list_with(
    source: TextSource<'_>,
    file: &str,
    options: &SpikeListOptions,
    progress: &mut dyn FnMut(u64, u64),
) -> Result<SpikeList, ImportError> {
    let mut table = Table::open_source(source, file, options.limits)?.with_progress(progress);
    let site_col = find_site_column(&table)?;
    let Some((time_col, time_unit)) = find_time_column(&table, options.time_unit, true, "")? else {
        unreachable!("a required time column is found or reported")
    };
    let stimulus_col =
        super::stimuli::find_amplitude_column(&table, super::stimuli::STIMULUS_COLUMN_BASES)?;
    let ignored_columns: Vec<String> = table
        .headers()
        .iter()
        .enumerate()
        .filter(|(i, _)| *i != site_col && *i != time_col && stimulus_col.is_none_or(|s| s.0 != *i))
        .map(|(_, h)| h.clone())
        .collect();

    let scale = time_unit.seconds();
    let what = format!("a spike time in {}", unit_words(time_unit));
    let mut index_of: HashMap<String, usize> = HashMap::new();
    let mut sites: Vec<SiteSpikes> = Vec::new();
    let mut out_of_order = 0usize;
    let mut max_decimals: Option<u32> = Some(0);
    let mut row_count = 0usize;

    let mut stimuli = Vec::new();
    let mut extremes = Extremes::default();
    let mut row = Row::default();
    while let Some(next) = table.next_row(&mut row) {
        next?;
        // A row with a value in the stimulus column is a stimulus, not a spike.
        if let Some((c, _)) = stimulus_col.filter(|(c, _)| !row.field(*c).is_empty()) {
            let time_s = table.number(&row, time_col, &what)? * scale;
            stimuli.push(super::stimuli::stimulus_from_row(
                &table,
                &row,
                time_s,
                time_col,
                c,
                Some(site_col),
                None,
            )?);
            continue;
        }
        let site = super::table::site_name(&table, &row, site_col)?;
        let value = table.number(&row, time_col, &what)?;
        if value < 0.0 {
            return Err(ImportError::new(
                table.place_column(Some(row.line), time_col),
                ImportProblem::BadValue,
                format!(
                    "expected a spike time of 0 or later, found {} {}",
                    value,
                    time_unit.symbol()
                ),
            ));
        }
        let text = row.field(time_col);
        max_decimals = match (max_decimals, decimal_places(text)) {
            (Some(a), Some(b)) => Some(a.max(b)),
            _ => None,
        };
        let index = match index_of.get(site) {
            Some(&i) => i,
            None => {
                index_of.insert(site.to_string(), sites.len());
                sites.push(SiteSpikes {
                    site: site.to_string(),
                    times_s: Vec::new(),
                });
                sites.len() - 1
            }
        };
        let time_s = value * scale;
        let train = &mut sites[index].times_s;
        if train.last().is_some_and(|&last| time_s < last) {
            out_of_order += 1;
        }
        train.push(time_s);
        extremes.offer(time_s, row.line, index);
        row_count += 1;
    }
    if row_count == 0 {
        return Err(ImportError::new(
            Place::file(file),
            ImportProblem::NoRows,
            "the file has a header but no spike rows",
        ));
    }

    let mut notices = Vec::new();
    let far_out = extremes.far_out(row_count);
    let latest_place = extremes
        .latest
        .iter()
        .map(|r| r.0)
        .filter(|p| !far_out.iter().any(|f| f.line == p.line))
        .max()
        .map(|p| {
            table
                .place_column(Some(p.line), time_col)
                .at_site(&sites[p.site].site)
        });
    for far in far_out {
        let train = &mut sites[far.site].times_s;
        if let Some(at) = train.iter().position(|&t| t == far.time_s) {
            train.remove(at);
            row_count -= 1;
        }
        notices.push(Notice::new(
            table
                .place_column(Some(far.line), time_col)
                .at_site(&sites[far.site].site),
            format!(
                "a spike time of {} s lies far from all the others (most lie between {} s and {} s), so it was set aside: look for a unit mistake or a stray row",
                crate::place::number(far.time_s),
                crate::place::number(far.bulk_s[0]),
                crate::place::number(far.bulk_s[1])
            ),
        ));
    }
    sites.retain(|s| !s.times_s.is_empty());
    for name in &ignored_columns {
        let index = table.headers().iter().position(|h| h == name).unwrap_or(0);
        notices.push(Notice::new(
            table.place_column(None, index),
            "column not used by the spike-list reader; its values were left out",
        ));
    }
    if out_of_order > 0 {
        for s in &mut sites {
            s.times_s.sort_by(f64::total_cmp);
        }
        notices.push(Notice::new(
            Place::file(file),
            format!("{out_of_order} rows were earlier than the row before them at the same site; each site's spikes were sorted by time"),
        ));
    }
    let repeated: usize = sites
        .iter()
        .map(|s| s.times_s.windows(2).filter(|w| w[0] == w[1]).count())
        .sum();
    if repeated > 0 {
        notices.push(Notice::new(
            Place::file(file),
            format!("{repeated} spikes repeat the time of the spike before them at the same site; they were kept"),
        ));
    }
    let time_quantum_s = max_decimals.map(|d| scale * 10f64.powi(-(d as i32)));
    let stimuli = match stimulus_col {
        Some((_, unit)) => Some(super::stimuli::finish(file, unit, stimuli, Vec::new())?),
        None => None,
    };
    Ok(SpikeList {
        file: file.to_string(),
        sites,
        latest_place,
        time_unit,
        time_quantum_s,
        ignored_columns,
        row_count,
        notices,
        stimuli,
    })
}

/// How many of the earliest and the latest spike times are kept with their lines, so that a
/// few far-out times can be set aside by line (more than this many are not "a few").
const EXTREMES_KEPT: usize = 16;

/// A time counts as far out when it lies further beyond the bulk of the others than this many
/// times the bulk's own span (and the span is taken as at least 1 s). Common practice, no
/// source: ten spans is far beyond any gap between sessions recorded as one file.
const FAR_OUT_SPANS: f64 = 10.0;

/// A spike time with its line and site index.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Placed {
    time_s: f64,
    line: u64,
    site: usize,
}

impl Eq for Placed {}
impl PartialOrd for Placed {
    fn partial_cmp(&self, other: &Self) -> Option<std::cmp::Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for Placed {
    fn cmp(&self, other: &Self) -> std::cmp::Ordering {
        self.time_s
            .total_cmp(&other.time_s)
            .then(self.line.cmp(&other.line))
    }
}

/// The `EXTREMES_KEPT + 1` earliest and latest spike times of a list, with their lines.
#[derive(Debug, Default)]
struct Extremes {
    /// The latest, as a min-heap (its top is the earliest of them).
    latest: std::collections::BinaryHeap<std::cmp::Reverse<Placed>>,
    /// The earliest, as a max-heap.
    earliest: std::collections::BinaryHeap<Placed>,
}

/// A time set aside as far out, with the bulk it lies far from.
#[derive(Debug, Clone, Copy, PartialEq)]
struct FarOut {
    time_s: f64,
    line: u64,
    site: usize,
    bulk_s: [f64; 2],
}

impl Extremes {
    fn offer(&mut self, time_s: f64, line: u64, site: usize) {
        let p = Placed { time_s, line, site };
        if self.latest.len() <= EXTREMES_KEPT {
            self.latest.push(std::cmp::Reverse(p));
        } else if self.latest.peek().is_some_and(|r| p > r.0) {
            self.latest.pop();
            self.latest.push(std::cmp::Reverse(p));
        }
        if self.earliest.len() <= EXTREMES_KEPT {
            self.earliest.push(p);
        } else if self.earliest.peek().is_some_and(|q| p < *q) {
            self.earliest.pop();
            self.earliest.push(p);
        }
    }

    /// The times that lie far beyond the bulk: beyond the (k+1)-th earliest or latest time by
    /// more than [`FAR_OUT_SPANS`] times the span between those two. None when they would be
    /// more than 1% of the `count` spikes (then they are not a few strays, and the analysis's
    /// span check decides), or when the earliest and latest kept overlap.
    fn far_out(&self, count: usize) -> Vec<FarOut> {
        let (Some(lo), Some(hi)) = (self.earliest.peek(), self.latest.peek().map(|r| r.0)) else {
            return Vec::new();
        };
        if self.latest.len() <= EXTREMES_KEPT || lo.time_s >= hi.time_s {
            return Vec::new();
        }
        let span = (hi.time_s - lo.time_s).max(1.0);
        let bulk_s = [lo.time_s, hi.time_s];
        let mut far: Vec<FarOut> = self
            .latest
            .iter()
            .map(|r| r.0)
            .filter(|p| p.time_s > hi.time_s + FAR_OUT_SPANS * span)
            .chain(
                self.earliest
                    .iter()
                    .copied()
                    .filter(|p| p.time_s < lo.time_s - FAR_OUT_SPANS * span),
            )
            .map(|p| FarOut {
                time_s: p.time_s,
                line: p.line,
                site: p.site,
                bulk_s,
            })
            .collect();
        if far.len() * 100 > count {
            return Vec::new();
        }
        far.sort_by_key(|f| f.line);
        far
    }
}

pub(crate) fn unit_words(unit: TimeUnit) -> &'static str {
    match unit {
        TimeUnit::Seconds => "seconds",
        TimeUnit::Milliseconds => "milliseconds",
        TimeUnit::Microseconds => "microseconds",
    }
}

pub(crate) fn find_site_column(table: &Table<'_>) -> Result<usize, ImportError> {
    let found: Vec<usize> = table
        .headers()
        .iter()
        .enumerate()
        .filter(|(_, h)| SITE_COLUMN_NAMES.iter().any(|n| h.eq_ignore_ascii_case(n)))
        .map(|(i, _)| i)
        .collect();
    match found.as_slice() {
        [one] => Ok(*one),
        [] => Err(ImportError::new(
            table.place_header(),
            ImportProblem::MissingColumn,
            format!(
                "expected a site column named one of {}, found the columns {}",
                SITE_COLUMN_NAMES.join(", "),
                quoted_list(table.headers())
            ),
        )),
        [_, second, ..] => Err(ImportError::new(
            table.place_column(None, *second),
            ImportProblem::BadHeader,
            "expected one site column, found more than one",
        )),
    }
}

/// Finds the one time column and its unit. `fallback` is the unit for a bare `time`
/// column. With `required` false, no time column gives `Ok(None)`; `missing_hint` ends the
/// error sentence when it is required and absent.
///
/// A header like `t_peak` or `time_min` (a time base followed by an unknown unit) is not
/// taken as the time column, so it cannot clash with the real one; it is named in the error
/// when no time column is found.
pub(crate) fn find_time_column(
    table: &Table<'_>,
    fallback: Option<TimeUnit>,
    required: bool,
    missing_hint: &str,
) -> Result<Option<(usize, TimeUnit)>, ImportError> {
    let read: Vec<(usize, UnitHeader<TimeUnit>)> = table
        .headers()
        .iter()
        .enumerate()
        .filter_map(|(i, h)| time_header(h, TIME_COLUMN_BASES).map(|m| (i, m)))
        .collect();
    let usable: Vec<&(usize, UnitHeader<TimeUnit>)> =
        read.iter().filter(|(_, m)| m.understood()).collect();
    if let [_, (second, _), ..] = usable.as_slice() {
        return Err(ImportError::new(
            table.place_column(None, *second),
            ImportProblem::BadHeader,
            "expected one time column, found more than one",
        ));
    }
    let Some((index, matched)) = usable.first() else {
        if !required {
            return Ok(None);
        }
        if let Some((i, UnitHeader::UnknownUnit(text))) = read.first() {
            return Err(ImportError::new(
                table.place_column(None, *i),
                ImportProblem::BadHeader,
                format!("expected a time unit s, ms or us in the column name, found '{text}'"),
            ));
        }
        return Err(ImportError::new(
            table.place_header(),
            ImportProblem::MissingColumn,
            format!(
                "expected a time column named time_s, time_ms or time_us{missing_hint}, found the columns {}",
                quoted_list(table.headers())
            ),
        ));
    };
    let index = *index;
    let unit = match matched {
        UnitHeader::Unit(unit) => {
            if let Some(given) = fallback.filter(|g| g != unit) {
                return Err(ImportError::new(
                    table.place_column(None, index),
                    ImportProblem::BadOption,
                    format!(
                        "the column name says {} but the time unit option says {}; remove one of them",
                        unit_words(*unit),
                        unit_words(given)
                    ),
                ));
            }
            *unit
        }
        _ => fallback.ok_or_else(|| {
            ImportError::new(
                table.place_column(None, index),
                ImportProblem::BadHeader,
                "the time column has no unit; name it time_s, time_ms or time_us, or, on the command line, give --time-unit",
            )
        })?,
    };
    Ok(Some((index, unit)))
}

pub(crate) fn quoted_list(names: &[String]) -> String {
    names
        .iter()
        .map(|n| format!("'{n}'"))
        .collect::<Vec<_>>()
        .join(", ")
}
