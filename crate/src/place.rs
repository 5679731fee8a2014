//! Where something happened in the user's input, and notices that are not errors.
//!
//! Every error and notice in ringline names its place: the file, the line (counted from 1,
//! comment and blank lines included, as an editor shows them), the column (counted from 1,
//! with its header name when there is one) and the site, as far as each is known.

use serde::Serialize;
use std::fmt;

/// A column of a delimited text file.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Column {
    /// Column number, counted from 1.
    pub number: usize,
    /// Header text of the column, as written in the file.
    pub name: Option<String>,
}

/// The place in the input that an error or notice refers to.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct Place {
    /// File name as the user gave it (no directories are added or removed).
    pub file: Option<String>,
    /// Line number in the file, counted from 1.
    pub line: Option<u64>,
    /// Column in the file.
    pub column: Option<Column>,
    /// Site (electrode or ROI) identifier.
    pub site: Option<String>,
}

impl Place {
    /// A place that is a whole file.
    pub fn file(name: &str) -> Self {
        Place {
            file: Some(name.to_string()),
            ..Place::default()
        }
    }

    /// A place that is one site, with no file attached.
    pub fn site(id: &str) -> Self {
        Place {
            site: Some(id.to_string()),
            ..Place::default()
        }
    }

    /// The same place at a given line.
    pub fn at_line(mut self, line: u64) -> Self {
        self.line = Some(line);
        self
    }

    /// The same place at a given column (number counted from 1).
    pub fn at_column(mut self, number: usize, name: Option<&str>) -> Self {
        self.column = Some(Column {
            number,
            name: name.map(str::to_string),
        });
        self
    }

    /// The same place for a given site.
    pub fn at_site(mut self, id: &str) -> Self {
        self.site = Some(id.to_string());
        self
    }

    /// True when nothing about the place is known.
    pub fn is_unknown(&self) -> bool {
        self.file.is_none() && self.line.is_none() && self.column.is_none() && self.site.is_none()
    }
}

impl fmt::Display for Place {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let mut parts: Vec<String> = Vec::new();
        if let Some(file) = &self.file {
            parts.push(file.clone());
        }
        if let Some(line) = self.line {
            parts.push(format!("line {line}"));
        }
        if let Some(column) = &self.column {
            match &column.name {
                Some(name) => parts.push(format!("column {} ('{}')", column.number, name)),
                None => parts.push(format!("column {}", column.number)),
            }
        }
        if let Some(site) = &self.site {
            parts.push(format!("site '{site}'"));
        }
        if parts.is_empty() {
            write!(f, "input")
        } else {
            write!(f, "{}", parts.join(", "))
        }
    }
}

/// Something the user should know about the input that did not stop the work:
/// a column that was left out, rows that were re-ordered, a gap in a trace.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Notice {
    /// Where it was seen.
    pub place: Place,
    /// One sentence for a scientist.
    pub message: String,
}

impl Notice {
    /// A notice at `place`.
    pub fn new(place: Place, message: impl Into<String>) -> Self {
        Notice {
            place,
            message: message.into(),
        }
    }
}

impl fmt::Display for Notice {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.place.is_unknown() {
            write!(f, "{}", self.message)
        } else {
            write!(f, "{}: {}", self.place, self.message)
        }
    }
}

/// A number as a message shows it: plain between 0.0001 and a billion (and 0), in exponent
/// form beyond (`1e300`, not three hundred digits), always the shortest form that reads back
/// as the same double.
pub fn number(v: f64) -> String {
    let a = v.abs();
    if v == 0.0 || (1e-4..1e9).contains(&a) || !v.is_finite() {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}

/// A size in bytes as people read it, with the binary prefixes of IEC 80000-13:
/// `512 B`, `1.5 KiB`, `13.7 MiB`, `2.0 GiB`.
pub fn bytes(n: u64) -> String {
    const KIB: f64 = 1024.0;
    let x = n as f64;
    if n < 1024 {
        format!("{n} B")
    } else if x < KIB * KIB {
        format!("{:.1} KiB", x / KIB)
    } else if x < KIB * KIB * KIB {
        format!("{:.1} MiB", x / (KIB * KIB))
    } else {
        format!("{:.1} GiB", x / (KIB * KIB * KIB))
    }
}

#[cfg(test)]
mod bytes_tests {
    /// The IEC 80000-13 prefixes: 1 KiB = 1024 B, 1 MiB = 1024 KiB, 1 GiB = 1024 MiB.
    #[test]
    fn sizes_use_binary_prefixes() {
        assert_eq!(super::bytes(0), "0 B");
        assert_eq!(super::bytes(1023), "1023 B");
        assert_eq!(super::bytes(1024), "1.0 KiB");
        assert_eq!(super::bytes(1536), "1.5 KiB");
        assert_eq!(super::bytes(14_400_044), "13.7 MiB");
        assert_eq!(super::bytes(3 << 30), "3.0 GiB");
    }
}

#[cfg(test)]
mod number_tests {
    use super::number;

    /// Round trip through Rust's own parser (the shortest representation that reads back,
    /// as Rust's `Display` and `LowerExp` promise), and the plain range.
    #[test]
    fn numbers_are_short_and_read_back() {
        for v in [
            0.0,
            1.5,
            -1.0,
            1e-300,
            1e300,
            f64::MAX,
            f64::MIN_POSITIVE,
            123_456_789.0,
            2e9,
            1e-5,
        ] {
            let shown = number(v);
            assert!(shown.len() <= 24, "{shown}");
            assert_eq!(shown.parse::<f64>().unwrap(), v);
        }
        assert_eq!(number(0.02), "0.02");
        assert_eq!(number(1e300), "1e300");
        assert_eq!(number(-1e-12), "-1e-12");
    }
}
