//! Layouts: one row per site with its position.

use super::error::{ImportError, ImportProblem};
use super::spikes::{find_site_column, quoted_list};
use super::table::{length_header, ImportLimits, LengthUnit, Row, Table, UnitHeader};
use crate::place::{Notice, Place};
use crate::recording::Site;
use serde::{Deserialize, Serialize};
use std::collections::HashMap;

/// Settings for reading a layout.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct LayoutOptions {
    /// Unit of the position columns when their names carry none (`x`, `y`).
    pub length_unit: Option<LengthUnit>,
    /// Size caps.
    pub limits: ImportLimits,
}

/// A layout as read from a file: sites with positions in micrometres.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Layout {
    /// File name as given.
    pub file: String,
    /// Sites in file order.
    pub sites: Vec<Site>,
    /// Unit the positions were written in.
    pub length_unit: LengthUnit,
    /// Columns that were not used, by header name.
    pub ignored_columns: Vec<String>,
    /// What the user should know.
    pub notices: Vec<Notice>,
}

/// Farthest a site may lie from the layout's origin, µm: a kilometre, far beyond any dish,
/// so a unit mistake or a stray number is named instead of giving speeds of 300 digits.
pub const MAX_POSITION_UM: f64 = 1e9;

/// Reads a layout from the bytes of a CSV or TSV file with columns `site, x_um, y_um`
/// (or `x_mm`, `y_mm`; or `x`, `y` with [`LayoutOptions::length_unit`]). Positions beyond
/// [`MAX_POSITION_UM`] are refused.
///
/// A site listed twice is an error that names both lines. Positions must be finite.
pub fn read_layout(
    bytes: &[u8],
    file: &str,
    options: &LayoutOptions,
) -> Result<Layout, ImportError> {
    let mut table = Table::open(bytes, file, options.limits)?;
    let site_col = find_site_column(&table)?;
    let (x_col, x_unit) = find_axis(&table, "x", options.length_unit)?;
    let (y_col, y_unit) = find_axis(&table, "y", options.length_unit)?;
    if x_unit != y_unit {
        return Err(ImportError::new(
            table.place_column(None, y_col),
            ImportProblem::BadHeader,
            "expected x and y in the same unit, found different units",
        ));
    }
    let scale = x_unit.micrometres();
    let unit_name = match x_unit {
        LengthUnit::Micrometres => "micrometres",
        LengthUnit::Millimetres => "millimetres",
    };
    let ignored_columns: Vec<String> = table
        .headers()
        .iter()
        .enumerate()
        .filter(|(i, _)| ![site_col, x_col, y_col].contains(i))
        .map(|(_, h)| h.clone())
        .collect();

    let mut seen: HashMap<String, u64> = HashMap::new();
    let mut sites = Vec::new();
    let mut row = Row::default();
    while let Some(next) = table.next_row(&mut row) {
        next?;
        let id = super::table::site_name(&table, &row, site_col)?;
        if let Some(first) = seen.get(id) {
            return Err(ImportError::new(
                table.place_column(Some(row.line), site_col).at_site(id),
                ImportProblem::DuplicateSite,
                format!(
                    "the site is listed twice, first on line {first}; each site needs one position"
                ),
            ));
        }
        seen.insert(id.to_string(), row.line);
        let x = table.number(&row, x_col, &format!("an x position in {unit_name}"))?;
        let y = table.number(&row, y_col, &format!("a y position in {unit_name}"))?;
        for (col, v) in [(x_col, x), (y_col, y)] {
            if (v * scale).abs() > MAX_POSITION_UM {
                return Err(ImportError::new(
                    table.place_column(Some(row.line), col).at_site(id),
                    ImportProblem::BadValue,
                    format!(
                        "expected a position within {MAX_POSITION_UM:e} µm (a kilometre) of the origin, found {} {unit_name}", crate::place::number(v)
                    ),
                ));
            }
        }
        sites.push(Site {
            id: id.to_string(),
            x_um: x * scale,
            y_um: y * scale,
        });
    }
    if sites.is_empty() {
        return Err(ImportError::new(
            Place::file(file),
            ImportProblem::NoRows,
            "the layout has a header but no site rows",
        ));
    }
    let notices = ignored_columns
        .iter()
        .map(|name| {
            let index = table.headers().iter().position(|h| h == name).unwrap_or(0);
            Notice::new(
                table.place_column(None, index),
                "column not used by the layout reader; its values were left out",
            )
        })
        .collect();
    Ok(Layout {
        file: file.to_string(),
        sites,
        length_unit: x_unit,
        ignored_columns,
        notices,
    })
}

fn find_axis(
    table: &Table<'_>,
    axis: &str,
    fallback: Option<LengthUnit>,
) -> Result<(usize, LengthUnit), ImportError> {
    let read: Vec<(usize, UnitHeader<LengthUnit>)> = table
        .headers()
        .iter()
        .enumerate()
        .filter_map(|(i, h)| length_header(h, axis).map(|m| (i, m)))
        .collect();
    let usable = read.iter().find(|(_, m)| m.understood());
    match (usable, read.first()) {
        (Some((i, UnitHeader::Unit(unit))), _) => Ok((*i, *unit)),
        (Some((i, _)), _) => fallback.map(|u| (*i, u)).ok_or_else(|| {
            ImportError::new(
                table.place_column(None, *i),
                ImportProblem::BadHeader,
                format!("the {axis} column has no unit; name it {axis}_um or {axis}_mm, or, on the command line, give --length-unit"),
            )
        }),
        (None, Some((i, UnitHeader::UnknownUnit(text)))) => Err(ImportError::new(
            table.place_column(None, *i),
            ImportProblem::BadHeader,
            format!("expected a length unit um or mm in the column name, found '{text}'"),
        )),
        _ => Err(ImportError::new(
            table.place_header(),
            ImportProblem::MissingColumn,
            format!(
                "expected a position column named {axis}_um or {axis}_mm, found the columns {}",
                quoted_list(table.headers())
            ),
        )),
    }
}
