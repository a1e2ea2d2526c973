//! The CSV table reader shared by every data shape: header, delimiter, comments, cells → SI.
//!
//! The reader streams the file once, line by line, through a filter that turns CRLF and lone
//! CR line endings into LF, drops comment and blank lines, strips a UTF-8 BOM, and remembers
//! where each kept line was in the file; the `csv` crate tokenises the filtered stream (quotes, delimiters), and its
//! record line numbers are mapped back to file lines. The delimiter is detected on the first
//! kept line (the header). Every requested column is parsed straight into one `Vec<f64>` in SI
//! units; no other copy of the data is held. A double quote that opens a cell and is never
//! closed is an error (the `csv` crate alone would read the rest of the file as that cell).
//! Cell and header texts quoted in messages are cut to [`SHOWN_CHARS`] characters.
//!
//! Delimiter rule: in the header line, outside double quotes, the most frequent of tab,
//! semicolon and comma wins; ties go to tab, then semicolon, then comma; a header with none of
//! them is a single column (comma).

use std::cell::RefCell;
use std::collections::HashMap;
use std::io::{BufRead, BufReader, Read};
use std::path::{Path, PathBuf};
use std::rc::Rc;

use crate::error::{Error, InputKind, Location, Result};
use crate::units::{split_header, Quantity, Unit};

use super::{ColumnSpec, ReadOptions};

/// One header cell.
#[derive(Debug, Clone)]
pub(crate) struct HeaderCol {
    /// The cell as written (trimmed), or `column N` when the cell is blank.
    pub text: String,
    /// The name part, lower-cased, for matching.
    pub key: String,
    /// The unit string, if any.
    pub unit: Option<String>,
}

/// The header of a table.
#[derive(Debug, Clone)]
pub(crate) struct Header {
    /// The file, as named by the caller.
    pub file: PathBuf,
    /// Line of the header row (from 1).
    pub line: u64,
    /// The columns, trailing blank header cells removed.
    pub cols: Vec<HeaderCol>,
}

impl Header {
    /// Location of the header cell of column `col`.
    pub fn loc(&self, col: usize) -> Location {
        let mut loc = Location::file(&self.file).with_line(self.line);
        if let Some(c) = self.cols.get(col) {
            loc = loc.with_column(shown(c.text.as_bytes()));
        }
        loc
    }

    /// Location of a data cell.
    pub fn cell(&self, line: u64, col: usize) -> Location {
        let mut loc = Location::file(&self.file).with_line(line);
        if let Some(c) = self.cols.get(col) {
            loc = loc.with_column(shown(c.text.as_bytes()));
        } else {
            loc = loc.with_column(format!("{}", col + 1));
        }
        loc
    }

    /// The header texts, for "columns present" messages (the first 20, each cut to
    /// [`SHOWN_CHARS`] characters).
    pub fn list(&self) -> String {
        const MAX: usize = 20;
        let mut list = self
            .cols
            .iter()
            .take(MAX)
            .map(|c| format!("'{}'", shown(c.text.as_bytes())))
            .collect::<Vec<_>>()
            .join(", ");
        if self.cols.len() > MAX {
            list.push_str(&format!(" and {} more", self.cols.len() - MAX));
        }
        list
    }

    /// Find the column whose name part (or whole text) equals `name`, ignoring case.
    pub fn find(&self, name: &str) -> Result<usize> {
        let want = name.trim().to_lowercase();
        let hits: Vec<usize> = self
            .cols
            .iter()
            .enumerate()
            .filter(|(_, c)| c.key == want || c.text.to_lowercase() == want)
            .map(|(i, _)| i)
            .collect();
        match hits.as_slice() {
            [i] => Ok(*i),
            [] => Err(Error::input(
                InputKind::UnknownColumn,
                Location::file(&self.file).with_line(self.line),
                format!(
                    "no column named '{}' in the header; the columns present are {}",
                    name.trim(),
                    self.list()
                ),
            )),
            [first, ..] => Err(Error::input(
                InputKind::UnknownColumn,
                self.loc(*first),
                format!(
                    "{} columns are named '{}' ({}); rename one of them in the header",
                    hits.len(),
                    name.trim(),
                    hits.iter()
                        .filter_map(|i| self.cols.get(*i))
                        .map(|c| format!("'{}'", shown(c.text.as_bytes())))
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            )),
        }
    }

    /// The unit of column `col`: the caller's override, else the header unit. With an
    /// `expected` kind a missing unit is an error (times, positions and temperatures must say
    /// their unit); without one a missing unit is a plain number ([`Unit::none`]).
    pub fn unit(&self, col: usize, spec: &ColumnSpec, expected: Option<Quantity>) -> Result<Unit> {
        let loc = self.loc(col);
        if let Some(u) = &spec.unit {
            if let Some(q) = expected {
                if u.quantity() != q {
                    return Err(Error::input(
                        InputKind::UnknownUnit,
                        loc,
                        format!(
                            "the unit given for this column, '{}', is a {} unit, but a {} is \
                             expected; use one of: {}",
                            u.label(),
                            u.quantity(),
                            q,
                            q.accepted()
                        ),
                    ));
                }
            }
            return Ok(u.clone());
        }
        match (self.cols.get(col).and_then(|c| c.unit.as_deref()), expected) {
            (Some(s), q) => Unit::parse_at(s, q, &loc),
            (None, Some(q)) => Err(Error::input(
                InputKind::UnknownUnit,
                loc,
                format!(
                    "this {} column has no unit; write it in the header in brackets, for \
                     example '{} [{}]', or give the unit in the experiment (accepted: {})",
                    q,
                    self.cols.get(col).map(|c| c.text.as_str()).unwrap_or("x"),
                    q.si_symbol(),
                    q.accepted()
                ),
            )),
            (None, None) => Ok(Unit::none()),
        }
    }
}

/// A check applied to every cell of a numeric column, in SI after conversion.
#[derive(Debug, Clone, Copy)]
pub(crate) enum CellCheck {
    /// No check.
    None,
    /// Must be > 0 (uncertainties).
    Positive,
    /// Must be ≥ 0 (times when no time origin is set).
    NonNegative,
    /// Must lie in `[lo, hi]` (positions inside the sample), m.
    Within(f64, f64),
}

/// A column to read.
#[derive(Debug, Clone)]
pub(crate) enum Request {
    /// A numeric column converted to SI. `diff` uses the difference map (uncertainties).
    Number {
        col: usize,
        unit: Unit,
        diff: bool,
        check: CellCheck,
    },
    /// A label column (run / series name).
    Label { col: usize },
}

/// The columns read from a table, in request order.
#[derive(Debug, Default)]
pub(crate) struct Columns {
    /// Numeric columns (SI), in the order of the numeric requests.
    pub numbers: Vec<Vec<f64>>,
    /// Label columns as indices into `label_names`, in the order of the label requests.
    pub labels: Vec<Vec<u32>>,
    /// Distinct labels per label request, in order of first appearance.
    pub label_names: Vec<Vec<String>>,
    /// File line of every row (from 1).
    pub lines: Vec<u64>,
}

/// Read the header of `src`, let `plan` choose the columns, then stream the rows.
pub(crate) fn read_table<R, F>(
    src: R,
    file: &Path,
    opts: &ReadOptions,
    plan: F,
) -> Result<(Header, Columns)>
where
    R: Read,
    F: FnOnce(&Header) -> Result<Vec<Request>>,
{
    let unreadable = |e: std::io::Error| {
        Error::input(
            InputKind::Unreadable,
            Location::file(file),
            format!("cannot read the file: {e}"),
        )
    };
    let map = Rc::new(RefCell::new(LineMap::default()));
    let mut filter = LineFilter::new(src, opts.delimiter, Rc::clone(&map));
    let any = filter.next_line().map_err(unreadable)?;
    if filter.utf16 {
        return Err(Error::input(
            InputKind::Encoding,
            Location::file(file).with_line(1),
            "the file is not UTF-8 text: it starts with a UTF-16 byte-order mark or has NUL \
             bytes (UTF-16 text, or not text at all); save it as UTF-8 (plain CSV) and try \
             again",
        ));
    }
    if !any {
        return Err(Error::input(
            InputKind::Empty,
            Location::file(file),
            "the file has no data (it is empty or holds only comments and blank lines); \
             check that the right file is named",
        ));
    }
    let delimiter = filter.delimiter();
    if opts.decimal_comma && delimiter == b',' {
        return Err(Error::setting(
            "decimal_comma",
            "a decimal comma needs a semicolon- or tab-separated file, but this file is \
             comma-separated",
        ));
    }

    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .comment(Some(b'#'))
        .delimiter(delimiter)
        .from_reader(filter);
    let line_of = |rec: &csv::ByteRecord| {
        let kept = rec.position().map(|p| p.line()).unwrap_or(1);
        map.borrow().original(kept)
    };
    let csv_err = |e: csv::Error| match e.into_kind() {
        csv::ErrorKind::Io(io) => unreadable(io),
        other => Error::input(
            InputKind::Syntax,
            Location::file(file),
            format!("the file is not valid CSV: {other:?}"),
        ),
    };

    // A quoted cell still open at the end of the file (the reader has read that far).
    let unclosed = |filter: &LineFilter<R>, header: Option<&Header>| match filter.unclosed {
        None => Ok(()),
        Some((line, cell)) => {
            let loc = match header {
                // Not in the header row itself, whose cell text is what the quote swallowed.
                Some(h) if line > h.line => h.cell(line, cell),
                _ => Location::file(file)
                    .with_line(line)
                    .with_column(format!("{}", cell + 1)),
            };
            Err(Error::input(
                InputKind::Syntax,
                loc,
                "this cell opens a double quote that is never closed, so the rest of the \
                 file would be read as one cell; add the closing quote or remove the opening \
                 one",
            ))
        }
    };

    // Header row.
    let mut rec = csv::ByteRecord::new();
    let mut header = None;
    while rdr.read_byte_record(&mut rec).map_err(csv_err)? {
        let line = line_of(&rec);
        if rec.iter().all(|c| trim_ascii(c).is_empty()) {
            unclosed(rdr.get_ref(), None)?;
            continue;
        }
        let parsed = parse_header(&rec, file, line);
        unclosed(rdr.get_ref(), parsed.as_ref().ok())?;
        header = Some(parsed?);
        break;
    }
    unclosed(rdr.get_ref(), None)?;
    let Some(header) = header else {
        return Err(Error::input(
            InputKind::Empty,
            Location::file(file),
            "the file has no rows; check that the right file is named",
        ));
    };

    let requests = plan(&header)?;
    let n_num = requests
        .iter()
        .filter(|r| matches!(r, Request::Number { .. }))
        .count();
    let n_lab = requests.len() - n_num;
    let mut out = Columns {
        numbers: vec![Vec::new(); n_num],
        labels: vec![Vec::new(); n_lab],
        label_names: vec![Vec::new(); n_lab],
        lines: Vec::new(),
    };
    let mut label_maps: Vec<HashMap<String, u32>> = vec![HashMap::new(); n_lab];
    let ncols = header.cols.len();
    let mut scratch = String::new();

    while rdr.read_byte_record(&mut rec).map_err(csv_err)? {
        unclosed(rdr.get_ref(), Some(&header))?;
        let line = line_of(&rec);
        if rec.iter().all(|c| trim_ascii(c).is_empty()) {
            continue; // blank line or a line of delimiters only
        }
        check_shape(&rec, &header, line, ncols)?;
        if std::str::from_utf8(rec.as_slice()).is_err() {
            let col = rec
                .iter()
                .position(|c| std::str::from_utf8(c).is_err())
                .unwrap_or(0);
            return Err(Error::input(
                InputKind::Encoding,
                header.cell(line, col),
                "this cell is not valid UTF-8 text; save the file as UTF-8 and try again",
            ));
        }
        let (mut ni, mut li) = (0usize, 0usize);
        for req in &requests {
            match req {
                Request::Number {
                    col,
                    unit,
                    diff,
                    check,
                } => {
                    let raw = rec.get(*col).unwrap_or(b"");
                    let x = parse_number(raw, &header, line, *col, opts, delimiter, &mut scratch)?;
                    let si = if *diff {
                        unit.diff_to_si(x)
                    } else {
                        unit.to_si(x)
                    };
                    if !si.is_finite() {
                        return Err(Error::input(
                            InputKind::NotFinite,
                            header.cell(line, *col),
                            format!(
                                "'{}' overflows when converted to SI units; check the \
                                 number and the column's unit",
                                shown(raw)
                            ),
                        ));
                    }
                    apply_check(*check, si, raw, unit, &header, line, *col)?;
                    if let Some(v) = out.numbers.get_mut(ni) {
                        v.push(si);
                    }
                    ni += 1;
                }
                Request::Label { col } => {
                    let raw = rec.get(*col).unwrap_or(b"");
                    let text = String::from_utf8_lossy(trim_ascii(raw));
                    if text.is_empty() {
                        return Err(Error::input(
                            InputKind::BadValue,
                            header.cell(line, *col),
                            "blank run name; give every row a run name, or delete the row",
                        ));
                    }
                    if let (Some(map), Some(names), Some(idx)) = (
                        label_maps.get_mut(li),
                        out.label_names.get_mut(li),
                        out.labels.get_mut(li),
                    ) {
                        let next = names.len() as u32;
                        let id = *map.entry(text.to_string()).or_insert_with(|| {
                            names.push(text.to_string());
                            next
                        });
                        idx.push(id);
                    }
                    li += 1;
                }
            }
        }
        out.lines.push(line);
    }
    unclosed(rdr.get_ref(), Some(&header))?;
    Ok((header, out))
}

/// Maps line numbers of the filtered stream (what the `csv` crate counts) to file lines.
#[derive(Debug, Default)]
struct LineMap {
    /// `(kept line, file line)` at every point where the offset between them changes.
    jumps: Vec<(u64, u64)>,
}

impl LineMap {
    fn record(&mut self, kept: u64, orig: u64) {
        let same = self
            .jumps
            .last()
            .is_some_and(|&(k, o)| o.wrapping_sub(k) == orig.wrapping_sub(kept));
        if !same {
            self.jumps.push((kept, orig));
        }
    }

    fn original(&self, kept: u64) -> u64 {
        let i = self.jumps.partition_point(|&(k, _)| k <= kept);
        match i.checked_sub(1).and_then(|i| self.jumps.get(i)) {
            Some(&(k, o)) => o + (kept - k),
            None => kept,
        }
    }
}

/// A reader that turns every line ending into LF: CRLF (Windows) and a lone CR (old Mac
/// files) each become one LF, so that lines are counted the same way whatever the file's
/// convention. A CR inside a quoted cell is turned into LF too.
struct LineEndings<R: Read> {
    src: R,
    /// The last byte handed out was a CR turned into LF: an LF right after it is dropped.
    after_cr: bool,
}

impl<R: Read> LineEndings<R> {
    fn new(src: R) -> Self {
        LineEndings {
            src,
            after_cr: false,
        }
    }
}

impl<R: Read> Read for LineEndings<R> {
    fn read(&mut self, out: &mut [u8]) -> std::io::Result<usize> {
        loop {
            let n = self.src.read(out)?;
            let Some(chunk) = out.get_mut(..n) else {
                return Ok(0);
            };
            // Fast path: nothing to change in this chunk.
            let lf_after_cr = self.after_cr && chunk.first() == Some(&b'\n');
            if !lf_after_cr && !chunk.contains(&b'\r') {
                self.after_cr = false;
                return Ok(n);
            }
            let mut kept = 0;
            for i in 0..n {
                let b = chunk.get(i).copied().unwrap_or(b'\n');
                if self.after_cr && b == b'\n' {
                    self.after_cr = false;
                    continue;
                }
                self.after_cr = b == b'\r';
                if let Some(slot) = chunk.get_mut(kept) {
                    *slot = if b == b'\r' { b'\n' } else { b };
                }
                kept += 1;
            }
            // A chunk that was a single dropped LF: read on rather than signal the end.
            if kept > 0 {
                return Ok(kept);
            }
        }
    }
}

/// Where a line scan is within the CSV fields, with the `csv` crate's quoting rules: a
/// double quote opens a quoted cell only as the first byte of a cell; inside, `""` is a quote
/// and a single `"` closes it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum QuoteState {
    /// At the start of a cell.
    CellStart,
    /// In a cell that did not start with a quote.
    Unquoted,
    /// In a quoted cell.
    Quoted,
    /// Just after a quote inside a quoted cell (closing it, or the first of `""`).
    QuoteInQuoted,
}

/// A reader that drops comment lines (first non-blank byte `#`) and blank lines outside
/// quoted fields and strips a UTF-8 BOM, recording where each kept line was in the file. The
/// `csv` crate then sees no line it would skip, so its line count of a record's start is
/// exact in the filtered stream and [`LineMap`] turns it into the file's. It also notes a
/// quoted cell still open at the end of the file, which the `csv` crate would silently
/// accept as one cell holding the rest of the file.
struct LineFilter<R: Read> {
    src: BufReader<LineEndings<R>>,
    buf: Vec<u8>,
    pos: usize,
    orig: u64,
    kept: u64,
    first: bool,
    /// The delimiter: the caller's, else detected on the first kept line.
    delimiter: Option<u8>,
    quote: QuoteState,
    /// Cell index (from 0) in the current record.
    cell: usize,
    /// File line and cell index where the quoted cell being read was opened.
    opened: (u64, usize),
    /// At the end of the input: a quoted cell opened at this (line, cell) was never closed.
    unclosed: Option<(u64, usize)>,
    /// The file starts with a UTF-16 byte-order mark, or its first line holds NUL bytes
    /// (UTF-16 without byte-order mark, or not text at all).
    utf16: bool,
    map: Rc<RefCell<LineMap>>,
}

impl<R: Read> LineFilter<R> {
    fn new(src: R, delimiter: Option<u8>, map: Rc<RefCell<LineMap>>) -> Self {
        LineFilter {
            src: BufReader::with_capacity(1 << 16, LineEndings::new(src)),
            buf: Vec::new(),
            pos: 0,
            orig: 0,
            kept: 0,
            first: true,
            delimiter,
            quote: QuoteState::CellStart,
            cell: 0,
            opened: (0, 0),
            unclosed: None,
            utf16: false,
            map,
        }
    }

    /// The unread part of the current line.
    fn current(&self) -> &[u8] {
        self.buf.get(self.pos..).unwrap_or(&[])
    }

    /// The delimiter in use (comma until the first kept line is read).
    fn delimiter(&self) -> u8 {
        self.delimiter.unwrap_or(b',')
    }

    /// Follow the quoting state through the current line.
    fn scan_quotes(&mut self) {
        // Most lines have no quote: outside a quoted cell, such a line ends outside one.
        if self.quote != QuoteState::Quoted && !self.buf.contains(&b'"') {
            self.quote = QuoteState::CellStart;
            self.cell = 0;
            return;
        }
        let d = self.delimiter();
        for &b in &self.buf {
            let end = b == b'\n';
            self.quote = match (self.quote, b) {
                (QuoteState::Quoted, b'"') => QuoteState::QuoteInQuoted,
                (QuoteState::Quoted, _) => QuoteState::Quoted,
                (QuoteState::QuoteInQuoted, b'"') => QuoteState::Quoted,
                (QuoteState::CellStart, b'"') => {
                    self.opened = (self.orig, self.cell);
                    QuoteState::Quoted
                }
                (_, b) if b == d => {
                    self.cell += 1;
                    QuoteState::CellStart
                }
                (_, _) if end => {
                    self.cell = 0;
                    QuoteState::CellStart
                }
                _ => QuoteState::Unquoted,
            };
        }
    }

    /// Load the next kept line; false at the end of the input.
    fn next_line(&mut self) -> std::io::Result<bool> {
        loop {
            self.buf.clear();
            self.pos = 0;
            if self.src.read_until(b'\n', &mut self.buf)? == 0 {
                if self.quote == QuoteState::Quoted {
                    self.unclosed = Some(self.opened);
                }
                return Ok(false);
            }
            self.orig += 1;
            if self.first {
                self.first = false;
                if self.buf.starts_with(&[0xFF, 0xFE])
                    || self.buf.starts_with(&[0xFE, 0xFF])
                    || self.buf.contains(&0)
                {
                    self.utf16 = true;
                } else if self.buf.starts_with(&[0xEF, 0xBB, 0xBF]) {
                    self.buf.drain(..3);
                }
            }
            if self.quote != QuoteState::Quoted {
                let content = trim_ascii(&self.buf);
                if content.is_empty() || content.starts_with(b"#") {
                    continue;
                }
            }
            if self.delimiter.is_none() {
                self.delimiter = Some(detect_delimiter(&self.buf));
            }
            self.scan_quotes();
            self.kept += 1;
            self.map.borrow_mut().record(self.kept, self.orig);
            return Ok(true);
        }
    }
}

impl<R: Read> Read for LineFilter<R> {
    /// Fills `out` with as many kept lines as fit (0 only at the end of the input).
    fn read(&mut self, out: &mut [u8]) -> std::io::Result<usize> {
        let mut filled = 0;
        while filled < out.len() {
            if self.pos >= self.buf.len() && !self.next_line()? {
                break;
            }
            let rest = self.current();
            let n = rest.len().min(out.len() - filled);
            if let (Some(dst), Some(src)) = (out.get_mut(filled..filled + n), rest.get(..n)) {
                dst.copy_from_slice(src);
            }
            self.pos += n;
            filled += n;
        }
        Ok(filled)
    }
}

/// The header of the data file at `path` as `(column name, unit as written)` pairs, read
/// with the same rules as the loaders (comments, BOM, delimiter detection). For reports that
/// show values in the units of the file.
pub fn read_header_units(path: &Path) -> Result<Vec<(String, Option<String>)>> {
    let file = std::fs::File::open(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let map = Rc::new(RefCell::new(LineMap::default()));
    let mut filter = LineFilter::new(file, None, Rc::clone(&map));
    let unreadable = |e: std::io::Error| Error::Io {
        path: path.to_path_buf(),
        source: e,
    };
    if !filter.next_line().map_err(unreadable)? || filter.utf16 {
        return Ok(Vec::new());
    }
    let delimiter = filter.delimiter();
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .delimiter(delimiter)
        .from_reader(filter);
    let mut rec = csv::ByteRecord::new();
    if !rdr.read_byte_record(&mut rec).unwrap_or(false) {
        return Ok(Vec::new());
    }
    let header = parse_header(&rec, path, map.borrow().original(1))?;
    Ok(header
        .cols
        .into_iter()
        .map(|c| (split_header(&c.text).0.to_string(), c.unit))
        .collect())
}

fn parse_header(rec: &csv::ByteRecord, file: &Path, line: u64) -> Result<Header> {
    let mut cells: Vec<&[u8]> = rec.iter().collect();
    while cells.last().is_some_and(|c| trim_ascii(c).is_empty()) {
        cells.pop();
    }
    let mut cols = Vec::with_capacity(cells.len());
    let mut numeric = 0usize;
    for (i, raw) in cells.iter().enumerate() {
        let Ok(text) = std::str::from_utf8(trim_ascii(raw)) else {
            return Err(Error::input(
                InputKind::Encoding,
                Location::file(file)
                    .with_line(line)
                    .with_column(format!("{}", i + 1)),
                "this header cell is not valid UTF-8 text; save the file as UTF-8 and try again",
            ));
        };
        if text.parse::<f64>().is_ok() || text.replace(',', ".").parse::<f64>().is_ok() {
            numeric += 1;
        }
        let text = if text.is_empty() {
            format!("column {}", i + 1)
        } else {
            text.to_string()
        };
        let (name, unit) = split_header(&text);
        cols.push(HeaderCol {
            key: name.to_lowercase(),
            unit: unit.map(str::to_string),
            text: text.clone(),
        });
    }
    if numeric > 0 && numeric == cells.iter().filter(|c| !trim_ascii(c).is_empty()).count() {
        let first = cells.first().map(|c| shown(c)).unwrap_or_default();
        return Err(Error::input(
            InputKind::NoHeader,
            Location::file(file).with_line(line),
            format!(
                "the first row holds only numbers (starting with '{first}'), so the file has \
                 no header; add a first line naming each column with its unit, for example \
                 'time [s],mass [mg]'"
            ),
        ));
    }
    Ok(Header {
        file: file.to_path_buf(),
        line,
        cols,
    })
}

fn check_shape(rec: &csv::ByteRecord, header: &Header, line: u64, ncols: usize) -> Result<()> {
    let n = rec.len();
    if n < ncols {
        return Err(Error::input(
            InputKind::RaggedRow,
            header.cell(line, n),
            format!(
                "this row has {n} cells but the header has {ncols} columns; the cell for \
                 column '{}' is missing. Fill in the row or delete it",
                header.cols.get(n).map(|c| c.text.as_str()).unwrap_or("?")
            ),
        ));
    }
    if n > ncols {
        // A trailing delimiter (blank extra cells) is fine; anything else is not.
        if let Some(extra) =
            (ncols..n).find(|&i| rec.get(i).is_some_and(|c| !trim_ascii(c).is_empty()))
        {
            return Err(Error::input(
                InputKind::RaggedRow,
                Location::file(&header.file)
                    .with_line(line)
                    .with_column(format!("{}", extra + 1)),
                format!(
                    "this row has {n} cells but the header has {ncols} columns (cell {} holds \
                     '{}'); add a header for the extra column or remove the extra cells",
                    extra + 1,
                    shown(rec.get(extra).unwrap_or(b""))
                ),
            ));
        }
    }
    Ok(())
}

#[allow(clippy::too_many_arguments)]
fn parse_number(
    raw: &[u8],
    header: &Header,
    line: u64,
    col: usize,
    opts: &ReadOptions,
    delimiter: u8,
    scratch: &mut String,
) -> Result<f64> {
    let cell = trim_ascii(raw);
    // from_utf8 cannot fail here (the record was checked), but stay total.
    let text = std::str::from_utf8(cell).unwrap_or("");
    if cell.is_empty() {
        return Err(Error::input(
            InputKind::NotANumber,
            header.cell(line, col),
            "this cell is blank but a number is needed; fill it in, or delete the row if the \
             measurement is missing",
        ));
    }
    let parsed = if opts.decimal_comma && text.contains(',') {
        scratch.clear();
        scratch.extend(text.chars().map(|c| if c == ',' { '.' } else { c }));
        scratch.parse::<f64>()
    } else {
        text.parse::<f64>()
    };
    match parsed {
        Ok(x) if x.is_finite() => Ok(x),
        Ok(_) => Err(Error::input(
            InputKind::NotFinite,
            header.cell(line, col),
            format!(
                "found '{}', which is not a finite number; replace it with the measured \
                 value or delete the row",
                shown(cell)
            ),
        )),
        Err(_) => {
            let hint = if text.contains(',') && delimiter != b',' && !opts.decimal_comma {
                " (it looks like a decimal comma: set the decimal-comma option for this file)"
            } else {
                ""
            };
            Err(Error::input(
                InputKind::NotANumber,
                header.cell(line, col),
                format!(
                    "expected a number, found '{}'{hint}; correct the cell, or delete the \
                     row",
                    shown(cell)
                ),
            ))
        }
    }
}

fn apply_check(
    check: CellCheck,
    si: f64,
    raw: &[u8],
    unit: &Unit,
    header: &Header,
    line: u64,
    col: usize,
) -> Result<()> {
    let text = || shown(raw);
    match check {
        CellCheck::None => Ok(()),
        CellCheck::Positive if si > 0.0 => Ok(()),
        CellCheck::Positive => Err(Error::input(
            InputKind::BadUncertainty,
            header.cell(line, col),
            format!(
                "uncertainty '{}' is not positive; a standard deviation must be > 0 (fix the \
                 cell, or leave the uncertainty column out to estimate it from the scatter)",
                text()
            ),
        )),
        CellCheck::NonNegative if si >= 0.0 => Ok(()),
        CellCheck::NonNegative => Err(Error::input(
            InputKind::NegativeTime,
            header.cell(line, col),
            format!(
                "time '{}' is negative; give the time of the step change (time origin) so that \
                 earlier rows are kept as baseline, or correct the time",
                text()
            ),
        )),
        CellCheck::Within(lo, hi) if si >= lo && si <= hi => Ok(()),
        CellCheck::Within(lo, hi) => Err(Error::input(
            InputKind::PositionOutside,
            header.cell(line, col),
            format!(
                "position '{}' lies outside the sample, which spans {} to {} {}; check the \
                 position unit and the sample thickness",
                text(),
                unit.from_si(lo),
                unit.from_si(hi),
                unit.label()
            ),
        )),
    }
}

/// Count delimiters outside double quotes and pick the most frequent (tab > `;` > `,`).
fn detect_delimiter(line: &[u8]) -> u8 {
    let (mut tab, mut semi, mut comma) = (0usize, 0usize, 0usize);
    let mut quoted = false;
    for &b in line {
        match b {
            b'"' => quoted = !quoted,
            b'\t' if !quoted => tab += 1,
            b';' if !quoted => semi += 1,
            b',' if !quoted => comma += 1,
            _ => {}
        }
    }
    if tab > 0 && tab >= semi && tab >= comma {
        b'\t'
    } else if semi > 0 && semi >= comma {
        b';'
    } else {
        b','
    }
}

/// Trim ASCII white space (including `\r`) from both ends.
pub(crate) fn trim_ascii(mut s: &[u8]) -> &[u8] {
    while let [first, rest @ ..] = s {
        if first.is_ascii_whitespace() {
            s = rest;
        } else {
            break;
        }
    }
    while let [rest @ .., last] = s {
        if last.is_ascii_whitespace() {
            s = rest;
        } else {
            break;
        }
    }
    s
}

/// The most characters of a cell quoted in a message.
pub(crate) const SHOWN_CHARS: usize = 40;

/// A cell's text for a message: trimmed, control characters escaped, cut to
/// [`SHOWN_CHARS`] characters (a binary file given as data must not flood the terminal).
pub(crate) fn shown(raw: &[u8]) -> String {
    let text = String::from_utf8_lossy(trim_ascii(raw));
    let mut out = String::new();
    for (i, c) in text.chars().enumerate() {
        if i == SHOWN_CHARS {
            out.push('…');
            break;
        }
        if c.is_control() {
            out.extend(c.escape_default());
        } else {
            out.push(c);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn delimiter_detection() {
        assert_eq!(detect_delimiter(b"time [s],mass [mg]\n"), b',');
        assert_eq!(detect_delimiter(b"time [s];mass [mg]\n"), b';');
        assert_eq!(detect_delimiter(b"time [s]\tmass [mg]\n"), b'\t');
        assert_eq!(detect_delimiter(b"\"a;b\",c\n"), b',');
        assert_eq!(detect_delimiter(b"time [s]\n"), b',');
    }

    #[test]
    fn trims_ascii_space() {
        assert_eq!(trim_ascii(b"  1.5\r"), b"1.5");
        assert_eq!(trim_ascii(b"   "), b"");
    }
}
