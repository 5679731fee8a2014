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
        let site = row.field(site_col);
        if site.is_empty() {
            return Err(ImportError::new(
                table.place_column(Some(row.line), site_col),
                ImportProblem::BadValue,
                "expected a site identifier, found an empty field",
            ));
        }
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
        time_unit,
        time_quantum_s,
        ignored_columns,
        row_count,
        notices,
        stimuli,
    })
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
