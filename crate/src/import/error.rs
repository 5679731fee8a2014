//! The import layer's one error type.

use crate::place::Place;
use serde::Serialize;

/// What kind of problem stopped an import. The sentence in [`ImportError::message`] says more.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ImportProblem {
    /// The file has no bytes, or only comments and blank lines.
    Empty,
    /// The file has a header line but no data rows.
    NoRows,
    /// The file is not UTF-8 text.
    NotText,
    /// A column that the format needs is not in the header.
    MissingColumn,
    /// A column name appears twice, or a column's unit cannot be read.
    BadHeader,
    /// A row has a different number of fields from the header.
    RaggedRow,
    /// A value could not be read, or is outside what the quantity allows.
    BadValue,
    /// The same site appears twice where it must appear once.
    DuplicateSite,
    /// Sites have activity but no position in the layout.
    UnplacedSites,
    /// The input is larger than the configured limit.
    TooLarge,
    /// An option given with the file is not usable.
    BadOption,
}

/// An import failed. Carries where (file, line, column, site) and one sentence for a scientist.
#[derive(Debug, Clone, PartialEq, Serialize, thiserror::Error)]
#[error("{place}: {message}")]
pub struct ImportError {
    /// Where the problem is (boxed to keep `Result`s small).
    pub place: Box<Place>,
    /// What kind of problem it is.
    pub problem: ImportProblem,
    /// What was expected and what was found, in words.
    pub message: String,
}

impl ImportError {
    pub fn new(place: Place, problem: ImportProblem, message: impl Into<String>) -> Self {
        ImportError {
            place: Box::new(place),
            problem,
            message: message.into(),
        }
    }
}
