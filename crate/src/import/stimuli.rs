//! Stimulus protocols: when each stimulus was given and how strong it was.
//!
//! A protocol file is a table with one row per stimulus:
//!
//! | column | holds |
//! |---|---|
//! | `time_s` / `time_ms` / `time_us` | when the stimulus was given |
//! | `amplitude_V`, `amplitude_mV`, `amplitude_V_per_m` (or `amplitude (V/m)`), `amplitude_uA`, `amplitude_mA` | its strength, with the unit in the name |
//! | `site` (optional; also `electrode`, `channel`) | the stimulating electrode; empty or absent for a field across the dish |
//! | `label` (optional) | the user's name for the stimulus or block |
//!
//! A spike list may carry the protocol instead: a column `stimulus_V` (any of the units
//! above, after `stimulus`) whose rows with a value are stimuli rather than spikes (their
//! site, if any, is the stimulating electrode). See [`super::read_spike_list`].

use super::error::{ImportError, ImportProblem};
use super::spikes::{find_site_column, find_time_column, quoted_list};
use super::table::{match_header, HeaderMatch, ImportLimits, Row, Table, TimeUnit};
use crate::place::{Notice, Place};
pub use crate::recording::{AmplitudeUnit, Stimulus, StimulusProtocol};

/// Base names of the amplitude column in a protocol file.
pub const AMPLITUDE_COLUMN_BASES: &[&str] = &["amplitude", "stimulus_amplitude", "stim_amplitude"];
/// Base names of the stimulus column inside a spike list.
pub const STIMULUS_COLUMN_BASES: &[&str] = &["stimulus", "stim"];
/// Header names of the optional label column.
const LABEL_COLUMN_NAMES: &[&str] = &["label", "stimulus_label", "block"];

/// Finds a column whose name is one of `bases` followed by an amplitude unit. `Ok(None)`
/// when there is none; an error when one names an unknown unit or there are two.
pub(crate) fn find_amplitude_column(
    table: &Table<'_>,
    bases: &[&str],
) -> Result<Option<(usize, AmplitudeUnit)>, ImportError> {
    let mut found: Option<(usize, AmplitudeUnit)> = None;
    for (i, h) in table.headers().iter().enumerate() {
        let unit_text = match match_header(h, bases) {
            HeaderMatch::No => continue,
            HeaderMatch::NoUnit => {
                return Err(ImportError::new(
                    table.place_column(None, i),
                    ImportProblem::BadHeader,
                    format!(
                        "expected the amplitude's unit in the column name ({h}_V, {h}_mV, {h}_V_per_m, {h}_uA or {h}_mA), found '{h}'"
                    ),
                ))
            }
            HeaderMatch::Unit(text) => text,
        };
        // match_header lowers the case: `mv` is read as mV (no one stimulates in MV).
        let unit = AmplitudeUnit::parse(&unit_text)
            .ok_or_else(|| {
                ImportError::new(
                    table.place_column(None, i),
                    ImportProblem::BadHeader,
                    format!(
                        "expected an amplitude unit V, mV, V/m, uA or mA in the column name, found '{unit_text}'"
                    ),
                )
            })?;
        if found.is_some() {
            return Err(ImportError::new(
                table.place_column(None, i),
                ImportProblem::BadHeader,
                "expected one amplitude column, found more than one",
            ));
        }
        found = Some((i, unit));
    }
    Ok(found)
}

/// Reads a stimulus protocol file (see the module's table of columns).
pub fn read_stimuli(
    bytes: &[u8],
    file: &str,
    time_unit: Option<TimeUnit>,
    limits: ImportLimits,
) -> Result<StimulusProtocol, ImportError> {
    let mut table = Table::open(bytes, file, limits)?;
    let Some((time_col, unit_of_time)) =
        find_time_column(&table, time_unit, true, " (when each stimulus was given)")?
    else {
        return Err(ImportError::new(
            table.place_header(),
            ImportProblem::MissingColumn,
            "expected a time column",
        ));
    };
    let Some((amp_col, unit)) = find_amplitude_column(&table, AMPLITUDE_COLUMN_BASES)? else {
        return Err(ImportError::new(
            table.place_header(),
            ImportProblem::MissingColumn,
            format!(
                "expected an amplitude column with its unit (amplitude_V, amplitude_mV, amplitude_V_per_m, amplitude_uA or amplitude_mA), found the columns {}",
                quoted_list(table.headers())
            ),
        ));
    };
    let site_col = find_site_column(&table).ok();
    let label_col = table
        .headers()
        .iter()
        .position(|h| LABEL_COLUMN_NAMES.iter().any(|n| h.eq_ignore_ascii_case(n)));
    let scale = unit_of_time.seconds();
    let mut stimuli = Vec::new();
    let mut row = Row::default();
    while let Some(next) = table.next_row(&mut row) {
        next?;
        let time = table.number(&row, time_col, "the time of a stimulus")?;
        stimuli.push(stimulus_from_row(
            &table,
            &row,
            time * scale,
            time_col,
            amp_col,
            site_col,
            label_col,
        )?);
    }
    finish(file, unit, stimuli, Vec::new())
}

/// One stimulus from a row whose time (s) is read; checks the time and the amplitude.
pub(crate) fn stimulus_from_row(
    table: &Table<'_>,
    row: &Row,
    time_s: f64,
    time_col: usize,
    amp_col: usize,
    site_col: Option<usize>,
    label_col: Option<usize>,
) -> Result<Stimulus, ImportError> {
    if time_s < 0.0 {
        return Err(ImportError::new(
            table.place_column(Some(row.line), time_col),
            ImportProblem::BadValue,
            format!(
                "expected a stimulus time of 0 or later, found {} s",
                crate::place::number(time_s)
            ),
        ));
    }
    let amplitude = table.number(row, amp_col, "a stimulus amplitude")?;
    if amplitude < 0.0 {
        return Err(ImportError::new(
            table.place_column(Some(row.line), amp_col),
            ImportProblem::BadValue,
            format!(
                "expected an amplitude of 0 or more (the strength of the stimulus; give its polarity in the label), found {amplitude}"
            ),
        ));
    }
    let text = |c: Option<usize>| {
        c.map(|c| row.field(c).to_string())
            .filter(|s| !s.is_empty())
    };
    Ok(Stimulus {
        time_s,
        amplitude,
        site: text(site_col),
        label: text(label_col),
        line: row.line,
    })
}

/// Sorts the stimuli by time and checks there is at least one.
pub(crate) fn finish(
    file: &str,
    unit: AmplitudeUnit,
    mut stimuli: Vec<Stimulus>,
    mut notices: Vec<Notice>,
) -> Result<StimulusProtocol, ImportError> {
    if stimuli.is_empty() {
        return Err(ImportError::new(
            Place::file(file),
            ImportProblem::NoRows,
            "the file has a stimulus column but no stimuli",
        ));
    }
    if stimuli.windows(2).any(|w| w[1].time_s < w[0].time_s) {
        stimuli.sort_by(|a, b| a.time_s.total_cmp(&b.time_s));
        notices.push(Notice::new(
            Place::file(file),
            "the stimuli were not in time order; they were sorted by time",
        ));
    }
    Ok(StimulusProtocol {
        file: file.to_string(),
        unit,
        stimuli,
        notices,
    })
}
