//! The one way ringline writes CSV: `csv::Writer` with quotes only where needed, and a field
//! that starts with `#` quoted too, because ringline's readers take a `#` at the start of a
//! line as a comment. Every table the tool writes goes through [`CsvOut`].

/// A CSV table being written in memory.
pub struct CsvOut {
    writer: csv::Writer<Vec<u8>>,
}

impl CsvOut {
    /// A table with this header line.
    pub fn new<I, S>(header: I) -> Self
    where
        I: IntoIterator<Item = S>,
        S: AsRef<[u8]>,
    {
        let mut out = CsvOut {
            writer: csv::WriterBuilder::new()
                .quote_style(csv::QuoteStyle::Necessary)
                .comment(Some(b'#'))
                .flexible(true)
                .from_writer(Vec::new()),
        };
        out.row(header);
        out
    }

    /// Appends one row. Writing into memory cannot fail, so errors are not returned.
    pub fn row<I, S>(&mut self, fields: I)
    where
        I: IntoIterator<Item = S>,
        S: AsRef<[u8]>,
    {
        let _ = self.writer.write_record(fields);
    }

    /// The table's text.
    pub fn finish(self) -> String {
        let bytes = self.writer.into_inner().unwrap_or_default();
        String::from_utf8(bytes).unwrap_or_default()
    }
}

/// A number in Rust's shortest round-trip form; empty when absent.
pub fn number(value: Option<f64>) -> String {
    value.map_or(String::new(), |v| v.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quotes_only_what_a_reader_would_misread() {
        let mut t = CsvOut::new(["site", "note"]);
        t.row(["#3", "plain"]);
        t.row(["A;1", "with, comma"]);
        t.row(["say \"hi\"", ""]);
        // RFC 4180 quoting (double the quote), plus the comment character at a field's start.
        assert_eq!(
            t.finish(),
            "site,note\n\"#3\",plain\nA;1,\"with, comma\"\n\"say \"\"hi\"\"\",\n"
        );
    }
}
