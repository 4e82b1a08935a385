//! Sheets to and from CSV, over any `io::Read` / `io::Write` (the kernel
//! opens no files). The rules are on [`Sheet::read_csv`] and
//! [`Sheet::write_csv`]. The csv parser never reports a quote left open (it
//! lets the quoted field run to the end of the input) and skips blank lines
//! silently, so a small scanner follows the bytes alongside it to catch
//! both.

use std::fmt::Write as _;
use std::io::{self, Read, Write};

use super::cells::{ColumnData, Value};
use super::{CellRef, Sheet};
use crate::kernel::error::{Error, Result};

/// How CSV is read and written.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CsvOptions {
    /// Field delimiter, `b','` by default (`b';'` and `b'\t'` are common).
    pub delimiter: u8,
    /// Read an empty field in a numeric column as an empty cell instead of
    /// refusing it. Off by default, so a missing number is never mistaken
    /// for a complete table.
    pub allow_empty_numbers: bool,
}

impl Default for CsvOptions {
    fn default() -> Self {
        CsvOptions {
            delimiter: b',',
            allow_empty_numbers: false,
        }
    }
}

impl Sheet {
    /// Reads a sheet (data columns only) from CSV.
    ///
    /// - The first record is the header: one unique, non-blank name per
    ///   column (a leading UTF-8 byte-order mark is ignored).
    /// - Every record must have as many fields as the header.
    /// - A column is numeric when each of its non-empty fields parses as a
    ///   number (spaces around it allowed) and at least one field is not
    ///   empty. In a numeric column `NaN` or `inf` is an error, and so is an
    ///   empty field unless [`CsvOptions::allow_empty_numbers`] is set (then
    ///   it is an empty cell).
    /// - Any other column is text: every field is kept exactly as written,
    ///   and an empty field is an empty cell.
    /// - Invalid UTF-8 and a quote left open at the end of the input are
    ///   errors. Blank lines between records are not rows and are skipped,
    ///   except in a one-column file, where a blank line could be meant as an
    ///   empty cell and is an error (write `""` for an empty cell there).
    ///   Blank lines at the end are ignored.
    ///
    /// No row is ever dropped. Errors are [`Error::Csv`] with the line and
    /// the column (field number), both counted from 1, or [`Error::Io`]
    /// when the reader fails.
    pub fn read_csv<R: Read>(reader: R, options: &CsvOptions) -> Result<Sheet> {
        read(reader, options)
    }

    /// Writes the sheet as CSV: a header row, then one record per row, `\n`
    /// line ends. Numbers are written in the shortest form that reads back
    /// to the same `f64` (Rust's `{}`: `0.30000000000000004`, `1`,
    /// `-0.00000025`, never an exponent); texts are quoted when they hold
    /// the delimiter, a quote or a line break; empty cells are empty fields
    /// (a lone empty field is written `""`). Formula columns are written as
    /// their values.
    ///
    /// [`Sheet::read_csv`] gives the sheet back unchanged (formula columns
    /// become data columns) for columns of numbers and columns of texts
    /// and empty cells. CSV has no types, so three kinds of column come
    /// back differently: a text column whose every non-empty cell looks
    /// like a number is read as numbers; a column mixing numbers and texts
    /// is read as texts; numbers with empty cells need
    /// [`CsvOptions::allow_empty_numbers`]. [`Sheet::write_json`] keeps
    /// types.
    pub fn write_csv<W: Write>(&self, writer: W, options: &CsvOptions) -> Result<()> {
        write(self, writer, options)
    }
}

fn csv_error(line: u64, column: Option<usize>, message: String) -> Error {
    Error::Csv {
        line,
        column,
        message,
    }
}

fn from_csv_error(e: csv::Error) -> Error {
    match e.into_kind() {
        csv::ErrorKind::Io(e) => Error::from(e),
        other => Error::Invalid(format!("csv: {other:?}")),
    }
}

// ---------------------------------------------------------------- reading

/// Scanner state, mirroring how the csv parser treats quotes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Scan {
    /// At the start of a field (a quote here opens a quoted field).
    FieldStart,
    /// Inside an unquoted field (quotes here are literal).
    Unquoted,
    /// Inside a quoted field.
    Quoted,
    /// Just after a quote inside a quoted field: `""` or the closing quote.
    QuoteSeen,
}

/// Passes bytes through to the csv parser while following quotes the same
/// way, because the parser itself never reports an open quote: it lets the
/// quoted field run to the end of the input. Also notes blank lines, which
/// the parser skips without a word.
struct QuoteWatch<R> {
    inner: R,
    delimiter: u8,
    state: Scan,
    /// Current line (1-based) and field (0-based) of the current record.
    line: u64,
    field: usize,
    /// Line where the current record started.
    record_line: u64,
    at_record_start: bool,
    /// Where the open quoted field started: (record line, quote line, field).
    open: Option<(u64, u64, usize)>,
    /// Bytes of a leading UTF-8 byte-order mark matched so far (the parser
    /// strips it); `None` once past it.
    bom: Option<usize>,
    line_has_content: bool,
    line_started_outside_quotes: bool,
    pending_blank: Option<u64>,
    /// First blank line that had content after it.
    first_blank: Option<u64>,
}

const BOM: [u8; 3] = [0xEF, 0xBB, 0xBF];

impl<R: Read> QuoteWatch<R> {
    fn new(inner: R, delimiter: u8) -> Self {
        QuoteWatch {
            inner,
            delimiter,
            state: Scan::FieldStart,
            line: 1,
            field: 0,
            record_line: 1,
            at_record_start: true,
            open: None,
            bom: Some(0),
            line_has_content: false,
            line_started_outside_quotes: true,
            pending_blank: None,
            first_blank: None,
        }
    }

    fn scan(&mut self, bytes: &[u8]) {
        for &b in bytes {
            if let Some(k) = self.bom {
                if b == BOM[k] {
                    self.bom = if k + 1 == BOM.len() {
                        None
                    } else {
                        Some(k + 1)
                    };
                    continue;
                }
                self.bom = None;
                if k > 0 {
                    // A partial mark is ordinary field content.
                    self.state = Scan::Unquoted;
                    self.content();
                }
            }
            self.step(b);
        }
    }

    fn content(&mut self) {
        self.line_has_content = true;
        if let Some(p) = self.pending_blank.take() {
            self.first_blank.get_or_insert(p);
        }
        if self.at_record_start {
            self.at_record_start = false;
            self.record_line = self.line;
        }
    }

    #[inline]
    fn step(&mut self, b: u8) {
        if b == b'\n' {
            let blank = !self.line_has_content
                && self.line_started_outside_quotes
                && self.state != Scan::Quoted;
            if blank {
                self.pending_blank.get_or_insert(self.line);
            }
        } else if b != b'\r' {
            self.content();
        }
        match self.state {
            Scan::Quoted => {
                if b == b'"' {
                    self.state = Scan::QuoteSeen;
                }
            }
            Scan::QuoteSeen if b == b'"' => self.state = Scan::Quoted,
            Scan::FieldStart | Scan::Unquoted | Scan::QuoteSeen => {
                if b == self.delimiter {
                    self.field += 1;
                    self.state = Scan::FieldStart;
                } else if b == b'\n' || b == b'\r' {
                    self.field = 0;
                    self.state = Scan::FieldStart;
                    self.at_record_start = true;
                } else if b == b'"' && self.state == Scan::FieldStart {
                    self.state = Scan::Quoted;
                    self.open = Some((self.record_line, self.line, self.field));
                } else {
                    self.state = Scan::Unquoted;
                }
            }
        }
        if b == b'\n' {
            self.line += 1;
            self.line_has_content = false;
            self.line_started_outside_quotes = self.state != Scan::Quoted;
        }
    }

    /// The open quote at end of input: (record line, quote line, field).
    fn unterminated(&self) -> Option<(u64, u64, usize)> {
        if self.state == Scan::Quoted {
            self.open
        } else {
            None
        }
    }
}

impl<R: Read> Read for QuoteWatch<R> {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.scan(&buf[..n]);
        Ok(n)
    }
}

fn unterminated_error((_, line, field): (u64, u64, usize)) -> Error {
    csv_error(
        line,
        Some(field + 1),
        "a quoted field is never closed: it runs to the end of the input \
         (close it with \"; a quote inside a quoted field is written \"\")"
            .to_string(),
    )
}

/// The raw text of one column: all fields back to back, with end offsets,
/// so reading allocates per column, not per cell.
#[derive(Default)]
struct RawColumn {
    text: String,
    ends: Vec<usize>,
}

impl RawColumn {
    fn field(&self, i: usize) -> &str {
        let start = if i == 0 { 0 } else { self.ends[i - 1] };
        &self.text[start..self.ends[i]]
    }
}

fn read<R: Read>(reader: R, options: &CsvOptions) -> Result<Sheet> {
    let mut rdr = csv::ReaderBuilder::new()
        .delimiter(options.delimiter)
        .has_headers(false)
        .flexible(false)
        .from_reader(QuoteWatch::new(reader, options.delimiter));
    let mut rec = csv::ByteRecord::new();

    // Header.
    let got = rdr
        .read_byte_record(&mut rec)
        .map_err(|e| record_error(e, &mut rdr, &[]))?;
    if !got {
        return Err(csv_error(
            1,
            None,
            "the input is empty: a header row with the column names is required".to_string(),
        ));
    }
    let header_line = rec.position().map_or(1, |p| p.line());
    let mut names: Vec<String> = Vec::with_capacity(rec.len());
    for (j, field) in rec.iter().enumerate() {
        let name = utf8_field(field, header_line, &rec, j, None)?;
        if name.trim().is_empty() {
            return Err(csv_error(
                header_line,
                Some(j + 1),
                "the column name is blank: every column needs a name".to_string(),
            ));
        }
        if let Some(k) = names.iter().position(|n| n == name) {
            return Err(csv_error(
                header_line,
                Some(j + 1),
                format!(
                    "the column name \"{name}\" is used twice (columns {} and {})",
                    k + 1,
                    j + 1
                ),
            ));
        }
        names.push(name.to_string());
    }

    // Records, kept as raw text until every row is in.
    let mut raw: Vec<RawColumn> = names.iter().map(|_| RawColumn::default()).collect();
    let mut lines: Vec<u64> = Vec::new();
    loop {
        match rdr.read_byte_record(&mut rec) {
            Ok(true) => {}
            Ok(false) => break,
            Err(e) => return Err(record_error(e, &mut rdr, &names)),
        }
        let line = rec.position().map_or(0, |p| p.line());
        for (j, field) in rec.iter().enumerate() {
            let s = utf8_field(field, line, &rec, j, Some(&names[j]))?;
            let col = &mut raw[j];
            col.text.push_str(s);
            col.ends.push(col.text.len());
        }
        lines.push(line);
    }
    let watch = rdr.get_ref();
    if let Some(open) = watch.unterminated() {
        return Err(unterminated_error(open));
    }
    if names.len() == 1 {
        if let Some(blank) = watch.first_blank.filter(|&l| l > header_line) {
            return Err(csv_error(
                blank,
                None,
                "blank line in a one-column file: write an empty cell as \"\" \
                 so that it is not taken for a blank line"
                    .to_string(),
            ));
        }
    }

    // Types.
    let mut columns: Vec<(String, ColumnData)> = Vec::with_capacity(names.len());
    let mut first_fault: Option<(usize, usize, String)> = None;
    for (j, (name, col)) in names.into_iter().zip(&raw).enumerate() {
        let (data, fault) = type_column(&name, col, lines.len(), options);
        if let Some((row, message)) = fault {
            if first_fault.as_ref().map_or(true, |(r, _, _)| row < *r) {
                first_fault = Some((row, j, message));
            }
        }
        columns.push((name, data));
    }
    if let Some((row, j, message)) = first_fault {
        let before: usize = raw[..j]
            .iter()
            .map(|c| c.field(row).matches('\n').count())
            .sum();
        return Err(csv_error(lines[row] + before as u64, Some(j + 1), message));
    }
    Sheet::from_columns(columns)
}

/// A field as text, or an error naming where the bad bytes are.
fn utf8_field<'r>(
    field: &'r [u8],
    record_line: u64,
    rec: &csv::ByteRecord,
    j: usize,
    column: Option<&str>,
) -> Result<&'r str> {
    std::str::from_utf8(field).map_err(|e| {
        let good = &field[..e.valid_up_to()];
        let newlines = rec
            .iter()
            .take(j)
            .chain([good])
            .fold(0, |n, f| n + f.iter().filter(|&&b| b == b'\n').count());
        let good = String::from_utf8_lossy(good);
        let tail: String = {
            let chars: Vec<char> = good.chars().collect();
            chars[chars.len().saturating_sub(20)..].iter().collect()
        };
        let whom = match column {
            None => "the header".to_string(),
            Some(name) => format!("column \"{name}\""),
        };
        csv_error(
            record_line + newlines as u64,
            Some(j + 1),
            format!("invalid UTF-8 in {whom} after \"{tail}\" (save the file as UTF-8)"),
        )
    })
}

/// Turns a parser error into a positioned message. A short record is often
/// the work of a quote left open (it swallows the rest of the input), so
/// the rest is read first to tell the two apart.
fn record_error<R: Read>(
    e: csv::Error,
    rdr: &mut csv::Reader<QuoteWatch<R>>,
    names: &[String],
) -> Error {
    match e.into_kind() {
        csv::ErrorKind::UnequalLengths {
            pos,
            expected_len,
            len,
        } => {
            let line = pos.as_ref().map_or(0, |p| p.line());
            let _ = io::copy(rdr.get_mut(), &mut io::sink());
            if let Some(open) = rdr.get_ref().unterminated() {
                if open.0 == line {
                    return unterminated_error(open);
                }
            }
            let (column, what) = if len < expected_len {
                let missing = names
                    .get(len as usize)
                    .map(|n| format!(" (\"{n}\" onwards)"))
                    .unwrap_or_default();
                (len as usize + 1, format!("fields are missing{missing}"))
            } else {
                (
                    expected_len as usize + 1,
                    "there are extra fields".to_string(),
                )
            };
            csv_error(
                line,
                Some(column),
                format!("this row has {len} fields but the header has {expected_len}: {what}"),
            )
        }
        csv::ErrorKind::Io(e) => Error::from(e),
        other => Error::Invalid(format!("csv: {other:?}")),
    }
}

/// Parses a field of a numeric-looking column.
fn number(field: &str) -> Option<f64> {
    field.trim().parse::<f64>().ok()
}

/// Decides the type of a column and builds it; also returns its first bad
/// cell (0-based row, message).
fn type_column(
    name: &str,
    col: &RawColumn,
    nrows: usize,
    options: &CsvOptions,
) -> (ColumnData, Option<(usize, String)>) {
    let blank = |s: &str| s.trim().is_empty();
    let numeric = (0..nrows).any(|i| !blank(col.field(i)))
        && (0..nrows).all(|i| blank(col.field(i)) || number(col.field(i)).is_some());
    if !numeric {
        let cells = (0..nrows)
            .map(|i| Value::from(col.field(i).to_string()))
            .collect();
        return (ColumnData::Values(cells), None);
    }
    let mut fault = None;
    let mut numbers = Vec::with_capacity(nrows);
    let mut has_empty = false;
    for i in 0..nrows {
        let f = col.field(i);
        if blank(f) {
            if !options.allow_empty_numbers {
                fault = Some((
                    i,
                    format!(
                        "\"{name}\" is a numeric column but this field is empty \
                         (fill it in, or allow empty numbers)"
                    ),
                ));
                break;
            }
            has_empty = true;
            numbers.push(f64::NAN);
            continue;
        }
        let x = number(f).unwrap_or(f64::NAN);
        if !x.is_finite() {
            fault = Some((
                i,
                format!(
                    "\"{name}\" is a numeric column but this field is \"{}\", \
                     which is not a finite number",
                    f.trim()
                ),
            ));
            break;
        }
        numbers.push(x);
    }
    if fault.is_some() {
        return (ColumnData::Numbers(Vec::new()), fault);
    }
    if has_empty {
        // NaN marked the empty fields above; every parsed number is finite.
        let cells = numbers
            .into_iter()
            .map(|x| {
                if x.is_nan() {
                    Value::Empty
                } else {
                    Value::Number(x)
                }
            })
            .collect();
        return (ColumnData::Values(cells), None);
    }
    (ColumnData::Numbers(numbers), None)
}

// ---------------------------------------------------------------- writing

fn write<W: Write>(sheet: &Sheet, writer: W, options: &CsvOptions) -> Result<()> {
    let mut wtr = csv::WriterBuilder::new()
        .delimiter(options.delimiter)
        .from_writer(writer);
    let cols = sheet.columns();
    wtr.write_record(cols.iter().map(|c| c.name.as_bytes()))
        .map_err(from_csv_error)?;
    let mut rec = csv::ByteRecord::new();
    let mut num = String::new();
    for r in 0..sheet.nrows() {
        rec.clear();
        for c in cols {
            match c.store.cell(r) {
                CellRef::Number(x) => {
                    num.clear();
                    let _ = write!(num, "{x}");
                    rec.push_field(num.as_bytes());
                }
                CellRef::Text(s) => rec.push_field(s.as_bytes()),
                CellRef::Empty => rec.push_field(b""),
            }
        }
        wtr.write_byte_record(&rec).map_err(from_csv_error)?;
    }
    wtr.flush()?;
    Ok(())
}
