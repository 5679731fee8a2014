//! Delimited text tables shared by all importers: BOM, delimiter, comments, header, units,
//! numbers, size limits. Everything here reports errors at file, line and column.

use super::error::{ImportError, ImportProblem};
use crate::place::Place;
use serde::{Deserialize, Serialize};

/// Caps on how much one file may hold, so a huge or runaway file gives a clear error
/// instead of exhausting memory (in the browser a tab has a few GiB at most).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(default)]
pub struct ImportLimits {
    /// Largest accepted file, in bytes.
    pub max_bytes: usize,
    /// Largest accepted number of data rows.
    pub max_rows: usize,
}

impl Default for ImportLimits {
    fn default() -> Self {
        ImportLimits {
            max_bytes: 1 << 30,
            max_rows: 50_000_000,
        }
    }
}

/// Unit of a time column.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum TimeUnit {
    Seconds,
    Milliseconds,
    Microseconds,
}

impl TimeUnit {
    /// Seconds per unit.
    pub fn seconds(self) -> f64 {
        match self {
            TimeUnit::Seconds => 1.0,
            TimeUnit::Milliseconds => 1e-3,
            TimeUnit::Microseconds => 1e-6,
        }
    }

    /// Short symbol, as used in column names (`s`, `ms`, `us`).
    pub fn symbol(self) -> &'static str {
        match self {
            TimeUnit::Seconds => "s",
            TimeUnit::Milliseconds => "ms",
            TimeUnit::Microseconds => "us",
        }
    }

    /// Reads a unit symbol (`s`, `sec`, `ms`, `us`, `µs`); `None` when it is not a time unit.
    pub fn parse(text: &str) -> Option<TimeUnit> {
        match text.trim().to_lowercase().as_str() {
            "s" | "sec" | "secs" | "second" | "seconds" => Some(TimeUnit::Seconds),
            "ms" | "msec" | "millisecond" | "milliseconds" => Some(TimeUnit::Milliseconds),
            "us" | "µs" | "μs" | "usec" | "microsecond" | "microseconds" => {
                Some(TimeUnit::Microseconds)
            }
            _ => None,
        }
    }
}

/// Unit of a position column.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LengthUnit {
    Micrometres,
    Millimetres,
}

impl LengthUnit {
    /// Micrometres per unit.
    pub fn micrometres(self) -> f64 {
        match self {
            LengthUnit::Micrometres => 1.0,
            LengthUnit::Millimetres => 1e3,
        }
    }

    /// Reads a unit symbol (`um`, `µm`, `mm`); `None` when it is not a length unit.
    pub fn parse(text: &str) -> Option<LengthUnit> {
        match text.trim().to_lowercase().as_str() {
            "um" | "µm" | "μm" | "micron" | "microns" | "micrometre" | "micrometer" => {
                Some(LengthUnit::Micrometres)
            }
            "mm" | "millimetre" | "millimeter" => Some(LengthUnit::Millimetres),
            _ => None,
        }
    }
}

/// How a header names a quantity: `base` alone, or `base` with a unit written as
/// `base_unit`, `base (unit)` or `base [unit]`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) enum HeaderMatch {
    /// The header is not this quantity.
    No,
    /// The header is the quantity with no unit.
    NoUnit,
    /// The header is the quantity with this unit text (not yet validated).
    Unit(String),
}

/// Matches a header against a quantity's base names (lower case).
pub(crate) fn match_header(header: &str, bases: &[&str]) -> HeaderMatch {
    let name = header.trim().to_lowercase();
    for base in bases {
        let Some(rest) = name.strip_prefix(base) else {
            continue;
        };
        if rest.is_empty() {
            return HeaderMatch::NoUnit;
        }
        let rest = rest.trim_start();
        let unit = if let Some(inner) = rest.strip_prefix('(').and_then(|r| r.strip_suffix(')')) {
            inner
        } else if let Some(inner) = rest.strip_prefix('[').and_then(|r| r.strip_suffix(']')) {
            inner
        } else if let Some(inner) = rest.strip_prefix('_') {
            inner
        } else {
            continue;
        };
        return HeaderMatch::Unit(unit.trim().to_string());
    }
    HeaderMatch::No
}

/// A header read as a quantity with a unit.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) enum UnitHeader<U> {
    /// The bare quantity name (`time`, `x`).
    NoUnit,
    /// The quantity with a unit that was understood.
    Unit(U),
    /// The quantity name followed by something that is not a known unit (`time_min`, `t_peak`).
    UnknownUnit(String),
}

impl<U> UnitHeader<U> {
    /// True unless the unit was not understood.
    pub(crate) fn understood(&self) -> bool {
        !matches!(self, UnitHeader::UnknownUnit(_))
    }
}

/// Reads a header as a time column (see `spikes::TIME_COLUMN_BASES`); `None` when it is not one.
pub(crate) fn time_header(header: &str, bases: &[&str]) -> Option<UnitHeader<TimeUnit>> {
    match match_header(header, bases) {
        HeaderMatch::No => None,
        HeaderMatch::NoUnit => Some(UnitHeader::NoUnit),
        HeaderMatch::Unit(text) => Some(match TimeUnit::parse(&text) {
            Some(unit) => UnitHeader::Unit(unit),
            None => UnitHeader::UnknownUnit(text),
        }),
    }
}

/// Reads a header as a position column for `axis`; `None` when it is not one.
pub(crate) fn length_header(header: &str, axis: &str) -> Option<UnitHeader<LengthUnit>> {
    match match_header(header, &[axis]) {
        HeaderMatch::No => None,
        HeaderMatch::NoUnit => Some(UnitHeader::NoUnit),
        HeaderMatch::Unit(text) => Some(match LengthUnit::parse(&text) {
            Some(unit) => UnitHeader::Unit(unit),
            None => UnitHeader::UnknownUnit(text),
        }),
    }
}

/// One data row of a table; the caller keeps one and [`Table::next_row`] refills it, so a
/// large file costs no allocation per row.
#[derive(Default)]
pub(crate) struct Row {
    /// Line number in the file (counted from 1).
    pub line: u64,
    fields: csv::StringRecord,
}

impl Row {
    /// Field `index` without surrounding white space; "" when absent.
    pub fn field(&self, index: usize) -> &str {
        self.fields.get(index).map_or("", str::trim)
    }
}

/// The bytes of a file on their way to the csv reader: checked as UTF-8 as they pass, and
/// kept from the last counted line on, so line numbers come out right without the file
/// being held whole (see [`Table::open_stream`]).
#[derive(Default)]
struct Window {
    /// Offset in the text (after the byte-order mark) of `bytes[0]`.
    start: usize,
    bytes: Vec<u8>,
    /// The tail of the last piece when it ended inside a UTF-8 sequence.
    carry: Vec<u8>,
    /// Offset of the first byte that is not UTF-8, once seen.
    not_utf8_at: Option<usize>,
}

impl Window {
    fn end(&self) -> usize {
        self.start + self.bytes.len()
    }

    /// Takes in the next piece of the text; false when it holds a byte sequence that is not
    /// UTF-8 (its offset is kept).
    fn take(&mut self, piece: &[u8], at_end: bool) -> bool {
        // The carried bytes are already in `bytes`: check from them on.
        let checked_from = self.end() - self.carry.len();
        self.bytes.extend_from_slice(piece);
        let pending = &self.bytes[checked_from - self.start..];
        let (carry, bad) = match std::str::from_utf8(pending) {
            Ok(_) => (0, None),
            // A sequence cut by the end of the piece: checked with the next one.
            Err(e) if e.error_len().is_none() && !at_end => (pending.len() - e.valid_up_to(), None),
            Err(e) => (0, Some(checked_from + e.valid_up_to())),
        };
        self.carry = self.bytes[self.bytes.len() - carry..].to_vec();
        if bad.is_some() {
            self.not_utf8_at = bad;
        }
        bad.is_none()
    }
}

/// A reader that passes the text to the csv reader through a [`Window`].
struct Feed<'a> {
    source: Box<dyn std::io::Read + 'a>,
    window: std::rc::Rc<std::cell::RefCell<Window>>,
}

impl std::io::Read for Feed<'_> {
    fn read(&mut self, out: &mut [u8]) -> std::io::Result<usize> {
        let n = self.source.read(out)?;
        if !self.window.borrow_mut().take(&out[..n], n == 0) {
            return Err(std::io::Error::new(
                std::io::ErrorKind::InvalidData,
                "not UTF-8",
            ));
        }
        Ok(n)
    }
}

/// Where a table's text comes from: the whole file in memory, or a reader that gives it in
/// pieces (a large file in the page), with its first bytes for telling what it holds.
pub enum TextSource<'a> {
    Bytes(&'a [u8]),
    Stream {
        /// The first bytes of the file (64 KiB is plenty), for sniffing.
        head: &'a [u8],
        /// Bytes in all.
        len: u64,
        /// The whole file from its start.
        reader: Box<dyn std::io::Read + 'a>,
    },
}

impl<'a> TextSource<'a> {
    /// The file's first bytes (all of them, in memory).
    pub fn head(&self) -> &[u8] {
        match self {
            TextSource::Bytes(b) => b,
            TextSource::Stream { head, .. } => head,
        }
    }
}

/// Longest header line read before giving up, bytes.
const MAX_HEADER_BYTES: usize = 64 << 20;

/// Bytes of the window kept behind the counted line before they are let go.
const WINDOW_SLACK_BYTES: usize = 1 << 16;

/// An open delimited table: header read, rows still to come.
pub(crate) struct Table<'a> {
    file: String,
    /// The text after the byte-order mark as it streams past; record byte offsets index it.
    window: std::rc::Rc<std::cell::RefCell<Window>>,
    /// Bytes of text in all (the file less its byte-order mark), for progress.
    text_len: usize,
    /// Line counting: the byte offset reached so far and the line number there.
    counted_to: usize,
    counted_line: u64,
    header_line: u64,
    headers: Vec<String>,
    reader: csv::Reader<Feed<'a>>,
    decimal_comma: bool,
    limits: ImportLimits,
    rows_read: usize,
    /// Told (bytes read, bytes in all) every [`PROGRESS_ROWS`] rows.
    progress: Option<&'a mut dyn FnMut(u64, u64)>,
}

/// Rows between two progress reports of a table being read.
pub(crate) const PROGRESS_ROWS: usize = 1 << 16;

impl<'a> Table<'a> {
    /// The table, telling `progress(bytes read, bytes in all)` as its rows are read.
    pub fn with_progress(mut self, progress: &'a mut dyn FnMut(u64, u64)) -> Self {
        self.progress = Some(progress);
        self
    }

    /// Opens `bytes` (the whole file) as a table with a header line.
    ///
    /// Accepts a UTF-8 byte-order mark, CRLF or LF line ends, `#` comment lines and blank
    /// lines. The delimiter is detected from the header line: tab, comma or semicolon.
    /// With a semicolon delimiter, a decimal comma in numbers is accepted.
    pub fn open(bytes: &'a [u8], file: &str, limits: ImportLimits) -> Result<Self, ImportError> {
        Table::open_stream(Box::new(bytes), bytes.len() as u64, file, limits)
    }

    /// [`Table::open`] or [`Table::open_stream`], as the source is.
    pub fn open_source(
        source: TextSource<'a>,
        file: &str,
        limits: ImportLimits,
    ) -> Result<Self, ImportError> {
        match source {
            TextSource::Bytes(bytes) => Table::open(bytes, file, limits),
            TextSource::Stream { len, reader, .. } => Table::open_stream(reader, len, file, limits),
        }
    }

    /// [`Table::open`] on a file read as it goes from `source` (`len` bytes in all): the file
    /// is never held whole, only the line being read and the csv reader's buffer.
    pub fn open_stream(
        mut source: Box<dyn std::io::Read + 'a>,
        len: u64,
        file: &str,
        limits: ImportLimits,
    ) -> Result<Self, ImportError> {
        use std::io::Read;
        let place = Place::file(file);
        if len > limits.max_bytes as u64 {
            return Err(ImportError::new(
                place,
                ImportProblem::TooLarge,
                format!(
                    "the file is {len} bytes, more than the limit of {} bytes (read.limits.max_bytes, --max-mib); raise the limit if this file is expected",
                    limits.max_bytes
                ),
            ));
        }
        let read_failed = |e: std::io::Error| {
            ImportError::new(
                Place::file(file),
                ImportProblem::BadValue,
                format!("the file could not be read: {e}"),
            )
        };
        // The head: up to the end of the first line that is neither blank nor a comment.
        let mut head = Vec::new();
        let mut at_end = false;
        // Whole lines already found blank or comments: (bytes, lines), so each byte of the
        // head is looked at once however many pieces it comes in.
        let mut passed = (0usize, 0u64);
        let header = loop {
            if head.starts_with(&[0xFF, 0xFE]) || head.starts_with(&[0xFE, 0xFF]) {
                return Err(ImportError::new(
                    place.at_line(1),
                    ImportProblem::NotText,
                    "expected UTF-8 text, found UTF-16 (the file starts with a UTF-16 byte-order mark): save it again as UTF-8 text",
                ));
            }
            let text = head.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(&head);
            if let Some((line, header_text, complete)) = first_content_line(&text[passed.0..]) {
                if complete || at_end {
                    break Some((passed.1 + line, detect_delimiter(header_text)));
                }
            } else if at_end {
                break None;
            }
            // Move past the whole lines seen (they are blank or comments) before reading on.
            if let Some(last) = text[passed.0..].iter().rposition(|&b| b == b'\n') {
                let seen = &text[passed.0..passed.0 + last + 1];
                passed.1 += seen.iter().filter(|&&b| b == b'\n').count() as u64;
                passed.0 += last + 1;
            }
            if head.len() >= MAX_HEADER_BYTES {
                return Err(ImportError::new(
                    place,
                    ImportProblem::BadHeader,
                    format!("expected a header line within the first {MAX_HEADER_BYTES} bytes, found none that ends there"),
                ));
            }
            let mut piece = vec![0u8; 1 << 16];
            let n = source.read(&mut piece).map_err(read_failed)?;
            head.extend_from_slice(&piece[..n]);
            at_end = n == 0;
        };
        let bom = if head.starts_with(b"\xEF\xBB\xBF") {
            3
        } else {
            0
        };
        let window = std::rc::Rc::new(std::cell::RefCell::new(Window::default()));
        let feed = Feed {
            source: Box::new(std::io::Cursor::new(head.split_off(bom)).chain(source)),
            window: window.clone(),
        };
        let Some((header_line, delimiter)) = header else {
            // Nothing but blank and comment lines: the bytes must still be text.
            let mut check = feed;
            let _ = std::io::copy(&mut check, &mut std::io::sink());
            if let Some(at) = window.borrow().not_utf8_at {
                return Err(not_text(file, line_of(&window.borrow(), 0, 1, at)));
            }
            return Err(ImportError::new(
                place,
                ImportProblem::Empty,
                "the file is empty (no header line and no data)",
            ));
        };
        let mut reader = csv::ReaderBuilder::new()
            .delimiter(delimiter)
            .comment(Some(b'#'))
            // Fields are trimmed when read (Row::field): csv's own trimming copies every record.
            .trim(csv::Trim::None)
            .flexible(true)
            .has_headers(true)
            .from_reader(feed);
        let headers: Vec<String> = match reader.headers() {
            Ok(h) => h.iter().map(|f| f.trim().to_string()).collect(),
            Err(e) => {
                if let Some(at) = window.borrow().not_utf8_at {
                    return Err(not_text(file, line_of(&window.borrow(), 0, 1, at)));
                }
                return Err(csv_error(file, Some(header_line), e));
            }
        };
        let table = Table {
            file: file.to_string(),
            window,
            text_len: (len as usize).saturating_sub(bom),
            counted_to: 0,
            counted_line: 1,
            header_line,
            headers,
            reader,
            decimal_comma: delimiter == b';',
            limits,
            rows_read: 0,
            progress: None,
        };
        table.check_header()?;
        Ok(table)
    }

    fn check_header(&self) -> Result<(), ImportError> {
        // Each name's first column, found in one pass (a header of 100,000 columns took 45 s
        // when every name was compared with every other).
        let mut first_of: std::collections::HashMap<String, usize> =
            std::collections::HashMap::with_capacity(self.headers.len());
        for (i, name) in self.headers.iter().enumerate() {
            first_of.entry(name.to_ascii_lowercase()).or_insert(i);
        }
        for (i, name) in self.headers.iter().enumerate() {
            too_long(
                || {
                    let mut place = Place::file(&self.file);
                    place.line = Some(self.header_line);
                    place.at_column(i + 1, None)
                },
                ImportProblem::BadHeader,
                "column name",
                name,
            )?;
            if name.is_empty() {
                return Err(ImportError::new(
                    self.place_column(None, i),
                    ImportProblem::BadHeader,
                    "expected a column name in the header, found an empty one",
                ));
            }
            if let Some(&j) = first_of.get(&name.to_ascii_lowercase()).filter(|&&j| j < i) {
                return Err(ImportError::new(
                    self.place_column(None, i),
                    ImportProblem::BadHeader,
                    format!(
                        "the column name '{}' appears twice (also column {})",
                        name,
                        j + 1
                    ),
                ));
            }
        }
        Ok(())
    }

    /// Header names as written (trimmed).
    pub fn headers(&self) -> &[String] {
        &self.headers
    }

    /// Place of a column (index counted from 0), optionally at a line.
    pub fn place_column(&self, line: Option<u64>, index: usize) -> Place {
        let mut place = Place::file(&self.file);
        place.line = line;
        place.at_column(index + 1, self.headers.get(index).map(String::as_str))
    }

    /// Place of a line.
    pub fn place_line(&self, line: u64) -> Place {
        Place::file(&self.file).at_line(line)
    }

    /// The csv reader reports a record's position from where it began reading, before the
    /// empty and `#` comment lines it skipped; this moves past them to the record itself.
    fn skip_ignored_lines(&self, mut offset: usize) -> usize {
        let window = self.window.borrow();
        while offset >= window.start && offset < window.end() {
            let rest = &window.bytes[offset - window.start..];
            let end = rest.iter().position(|&b| b == b'\n');
            let line = &rest[..end.unwrap_or(rest.len())];
            let ignored = line.is_empty() || line == b"\r" || line.starts_with(b"#");
            match (ignored, end) {
                (true, Some(end)) => offset += end + 1,
                _ => break,
            }
        }
        offset
    }

    /// Place of the header line.
    pub fn place_header(&self) -> Place {
        self.place_line(self.header_line)
    }

    /// Line number (from 1) of a byte offset, counting every line: the csv reader's own line
    /// count skips comment and blank lines, which would send the user to the wrong line.
    /// Offsets arrive in increasing order, so counting resumes where it stopped, and the text
    /// before it is let go.
    fn line_at(&mut self, offset: usize) -> u64 {
        let offset = self.skip_ignored_lines(offset);
        if offset <= self.counted_to {
            return self.counted_line;
        }
        let mut window = self.window.borrow_mut();
        self.counted_line = line_of(&window, self.counted_to, self.counted_line, offset);
        self.counted_to = offset.min(window.end());
        if self.counted_to - window.start > WINDOW_SLACK_BYTES {
            let drop = self.counted_to - window.start;
            window.bytes.drain(..drop);
            window.start = self.counted_to;
        }
        self.counted_line
    }

    /// The located error for text that is not UTF-8, if the window saw such bytes.
    fn not_text_error(&mut self) -> Option<ImportError> {
        let at = self.window.borrow().not_utf8_at?;
        Some(not_text(
            &self.file,
            line_of(
                &self.window.borrow(),
                self.counted_to,
                self.counted_line,
                at,
            ),
        ))
    }

    /// Reads the next data row; `None` at the end of the file. Lines of only spaces or
    /// delimiters are passed over like blank lines.
    pub fn next_row(&mut self, row: &mut Row) -> Option<Result<(), ImportError>> {
        let record = &mut row.fields;
        loop {
            match self.reader.read_record(record) {
                Ok(false) => return None,
                Err(_) if self.window.borrow().not_utf8_at.is_some() => {
                    return self.not_text_error().map(Err);
                }
                Err(e) => {
                    let line = e.position().map(|p| self.line_at(p.byte() as usize));
                    return Some(Err(csv_error(&self.file, line, e)));
                }
                Ok(true) if record.iter().all(|f| f.trim().is_empty()) => {
                    // Counted all the same, so the window lets go of it.
                    if let Some(p) = record.position() {
                        self.line_at(p.byte() as usize);
                    }
                    continue;
                }
                Ok(true) => break,
            }
        }
        let line = record
            .position()
            .map_or(0, |p| self.line_at(p.byte() as usize));
        self.rows_read += 1;
        if self.rows_read % PROGRESS_ROWS == 0 {
            let total = self.text_len as u64;
            if let (Some(report), Some(p)) = (self.progress.as_mut(), record.position()) {
                report(p.byte(), total);
            }
        }
        if self.rows_read > self.limits.max_rows {
            return Some(Err(ImportError::new(
                self.place_line(line),
                ImportProblem::TooLarge,
                format!(
                    "the file has more than {} data rows, the limit (read.limits.max_rows, --max-rows); raise the limit if this file is expected",
                    self.limits.max_rows
                ),
            )));
        }
        if record.len() != self.headers.len() {
            return Some(Err(ImportError::new(
                self.place_line(line),
                ImportProblem::RaggedRow,
                format!(
                    "expected {} fields as in the header, found {}",
                    self.headers.len(),
                    record.len()
                ),
            )));
        }
        row.line = line;
        Some(Ok(()))
    }

    /// Reads field `index` of `row` as a finite number; `what` names the quantity
    /// in the error ("a time in milliseconds").
    pub fn number(&self, row: &Row, index: usize, what: &str) -> Result<f64, ImportError> {
        let text = row.field(index);
        parse_number(text, self.decimal_comma)
            .filter(|v| v.is_finite())
            .ok_or_else(|| {
                let found = if text.is_empty() {
                    "an empty field".to_string()
                } else {
                    format!("'{}'", shorten(text))
                };
                ImportError::new(
                    self.place_column(Some(row.line), index),
                    ImportProblem::BadValue,
                    format!("expected {what}, found {found}"),
                )
            })
    }

    /// Reads field `index` as a number that may be missing: an empty field, `NaN` or `NA`
    /// give `Ok(None)`; text that is not a number is an error.
    pub fn optional_number(
        &self,
        row: &Row,
        index: usize,
        what: &str,
    ) -> Result<Option<f64>, ImportError> {
        let text = row.field(index);
        if text.is_empty() || text.eq_ignore_ascii_case("nan") || text.eq_ignore_ascii_case("na") {
            return Ok(None);
        }
        self.number(row, index, what).map(Some)
    }
}

/// Parses a decimal number, accepting a decimal comma when `decimal_comma` is set.
pub(crate) fn parse_number(text: &str, decimal_comma: bool) -> Option<f64> {
    if decimal_comma && text.contains(',') && !text.contains('.') {
        return text.replacen(',', ".", 1).parse().ok();
    }
    text.parse().ok()
}

/// Number of digits after the decimal separator in plain decimal notation; `None` for
/// exponent notation, where the written precision is not the time quantum.
pub(crate) fn decimal_places(text: &str) -> Option<u32> {
    if text.contains(['e', 'E']) {
        return None;
    }
    match text.find(['.', ',']) {
        Some(i) => Some(text[i + 1..].chars().filter(char::is_ascii_digit).count() as u32),
        None => Some(0),
    }
}

/// Longest site identifier or column name read, characters (a name is a label, not data;
/// a limit we chose, so that no message echoes megabytes).
pub const MAX_NAME_CHARS: usize = 256;

/// A site identifier from field `index` of `row`: refused when empty or longer than
/// [`MAX_NAME_CHARS`], at its line and column.
pub(crate) fn site_name<'r>(
    table: &Table<'_>,
    row: &'r Row,
    index: usize,
) -> Result<&'r str, ImportError> {
    let id = row.field(index);
    if id.is_empty() {
        return Err(ImportError::new(
            table.place_column(Some(row.line), index),
            ImportProblem::BadValue,
            "expected a site identifier, found an empty field",
        ));
    }
    too_long(
        || table.place_column(Some(row.line), index),
        ImportProblem::BadValue,
        "site identifier",
        id,
    )?;
    Ok(id)
}

/// Refuses a name (`what`: "column name", "site identifier") longer than
/// [`MAX_NAME_CHARS`], quoting only its start.
fn too_long(
    place: impl FnOnce() -> Place,
    problem: ImportProblem,
    what: &str,
    name: &str,
) -> Result<(), ImportError> {
    if name.len() > MAX_NAME_CHARS && name.chars().count() > MAX_NAME_CHARS {
        return Err(ImportError::new(
            place(),
            problem,
            format!(
                "expected a {what} of at most {MAX_NAME_CHARS} characters, found one of {} starting '{}'",
                name.chars().count(),
                shorten(name)
            ),
        ));
    }
    Ok(())
}

fn shorten(text: &str) -> String {
    const MAX: usize = 40;
    if text.chars().count() <= MAX {
        text.to_string()
    } else {
        let head: String = text.chars().take(MAX).collect();
        format!("{head}...")
    }
}

/// First line that is neither blank nor a `#` comment, with its line number (from 1) and
/// whether a line end follows it (else it may go on in bytes not yet read).
fn first_content_line(bytes: &[u8]) -> Option<(u64, &[u8], bool)> {
    let lines = bytes.split(|&b| b == b'\n').count();
    bytes
        .split(|&b| b == b'\n')
        .enumerate()
        .map(|(i, line)| (i, line.strip_suffix(b"\r").unwrap_or(line)))
        .find(|(_, line)| {
            let trimmed = line.trim_ascii();
            !trimmed.is_empty() && !trimmed.starts_with(b"#")
        })
        .map(|(i, line)| (i as u64 + 1, line, i + 1 < lines))
}

/// The line number at byte offset `to`, counting the line ends after `from` (at line
/// `line`) in the window's bytes.
fn line_of(window: &Window, from: usize, line: u64, to: usize) -> u64 {
    let a = from.max(window.start).min(window.end()) - window.start;
    let b = to.max(window.start).min(window.end()) - window.start;
    line + window.bytes[a..b.max(a)]
        .iter()
        .filter(|&&c| c == b'\n')
        .count() as u64
}

fn not_text(file: &str, line: u64) -> ImportError {
    ImportError::new(
        Place::file(file).at_line(line),
        ImportProblem::NotText,
        "expected UTF-8 text, found a byte sequence that is not (is this a binary file or another text encoding?)",
    )
}

/// Tab if the header has one, else comma, else semicolon, else comma (a single column).
/// Characters inside quoted names do not count.
fn detect_delimiter(header: &[u8]) -> u8 {
    let mut quoted = false;
    let unquoted: Vec<u8> = header
        .iter()
        .copied()
        .filter(|&b| {
            if b == b'"' {
                quoted = !quoted;
            }
            !quoted
        })
        .collect();
    let count = |d: u8| unquoted.iter().filter(|&&b| b == d).count();
    if count(b'\t') > 0 {
        b'\t'
    } else if count(b',') > 0 {
        b','
    } else if count(b';') > 0 {
        b';'
    } else {
        b','
    }
}

fn csv_error(file: &str, line: Option<u64>, error: csv::Error) -> ImportError {
    let mut place = Place::file(file);
    place.line = line;
    let message = match error.kind() {
        csv::ErrorKind::Utf8 { .. } => "expected UTF-8 text, found bytes that are not".to_string(),
        _ => format!("the file cannot be read as a table: {error}"),
    };
    ImportError::new(place, ImportProblem::BadValue, message)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn header_units_in_three_spellings() {
        let bases = ["time"];
        assert_eq!(
            match_header("time_ms", &bases),
            HeaderMatch::Unit("ms".into())
        );
        assert_eq!(
            match_header("Time (s)", &bases),
            HeaderMatch::Unit("s".into())
        );
        assert_eq!(
            match_header("time [us]", &bases),
            HeaderMatch::Unit("us".into())
        );
        assert_eq!(match_header("time", &bases), HeaderMatch::NoUnit);
        assert_eq!(match_header("timestamp", &bases), HeaderMatch::No);
    }

    #[test]
    fn decimal_places_follow_the_text() {
        assert_eq!(decimal_places("12.345"), Some(3));
        assert_eq!(decimal_places("12"), Some(0));
        assert_eq!(decimal_places("1.2e-3"), None);
    }

    #[test]
    fn decimal_comma_only_when_asked() {
        assert_eq!(parse_number("1,5", true), Some(1.5));
        assert_eq!(parse_number("1,5", false), None);
    }

    #[test]
    fn line_numbers_count_comments_and_blank_lines() {
        let text = b"# a comment\nsite,time_s\n\n# another\nA,1.0\nB,oops\n";
        let mut table = Table::open(text, "f.csv", ImportLimits::default()).unwrap();
        let mut row = Row::default();
        table.next_row(&mut row).unwrap().unwrap();
        assert_eq!(row.line, 5);
        table.next_row(&mut row).unwrap().unwrap();
        assert_eq!(row.line, 6);
        let err = table.number(&row, 1, "a time").unwrap_err();
        assert_eq!(err.place.line, Some(6));
        assert_eq!(err.place.column.as_ref().map(|c| c.number), Some(2));
    }
}
