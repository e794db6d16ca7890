//! Reading one CSV file of a network into text cells that remember their line and column.
//!
//! The rules (ours, see docs/network-format.md): a header row is required; columns come in any
//! order and their names are compared without regard to case or surrounding spaces; lines that
//! start with `#` are comments; an empty cell means "use the default"; unknown columns are
//! ignored and listed once in a note; UTF-8 with or without a byte-order mark; CRLF or LF;
//! quoted fields.

use std::collections::HashMap;
use std::path::Path;

use super::diagnostic::{quoted, Diagnostics, Location};
use super::limits::Limit;
use crate::units::{Quantity, UnitSystem};

/// Largest input file firemain reads. A 300,000-junction network's pipes file is about 30 MB;
/// anything past this is almost certainly the wrong file, and reading it would exhaust memory.
pub const MAX_INPUT_BYTES: u64 = 1 << 30;

/// What a reader expects of a file's columns.
pub struct TableSpec<'a> {
    /// Every column the reader uses.
    pub known: &'a [&'a str],
    /// The columns that must be present.
    pub required: &'a [&'a str],
}

/// A CSV file read into text cells.
#[derive(Debug)]
pub struct Table {
    /// The file name as shown in diagnostics (e.g. `pipes.csv`).
    pub file: String,
    columns: HashMap<String, usize>,
    rows: Vec<Row>,
    /// Rows refused whole (already reported: a wrong number of fields, a cell over several
    /// lines or not UTF-8), kept so that references to their ids are not reported again.
    refused: Vec<Row>,
}

/// One data row: its line in the file and its trimmed fields.
#[derive(Debug)]
pub struct Row {
    pub line: u64,
    fields: Vec<String>,
}

/// One cell, with its location for diagnostics.
#[derive(Debug, Clone, Copy)]
pub struct Cell<'a> {
    pub text: &'a str,
    pub line: u64,
    /// 1-based field number; 0 when the column is absent from the file.
    pub column: u64,
    pub column_name: &'a str,
}

impl Cell<'_> {
    pub fn location(&self, file: &str) -> Location {
        if self.column == 0 {
            Location::line(file, self.line)
        } else {
            Location::cell(file, self.line, self.column)
        }
    }

    pub fn is_empty(&self) -> bool {
        self.text.is_empty()
    }
}

impl Table {
    pub fn rows(&self) -> &[Row] {
        &self.rows
    }

    /// The ids (column `id`) of the rows refused whole while reading, where readable.
    pub fn refused_ids(&self) -> impl Iterator<Item = &str> {
        let column = self.columns.get("id").copied();
        self.refused.iter().filter_map(move |row| {
            let text = row.fields.get(column?)?.as_str();
            (!text.is_empty()).then_some(text)
        })
    }

    pub fn has_column(&self, name: &str) -> bool {
        self.columns.contains_key(name)
    }

    /// The cell of `row` in column `name`; an absent column reads as an empty cell.
    pub fn cell<'a>(&'a self, row: &'a Row, name: &'a str) -> Cell<'a> {
        match self.columns.get(name) {
            Some(&i) => Cell {
                text: row.fields.get(i).map(String::as_str).unwrap_or(""),
                line: row.line,
                column: i as u64 + 1,
                column_name: name,
            },
            None => Cell {
                text: "",
                line: row.line,
                column: 0,
                column_name: name,
            },
        }
    }
}

/// The cells of one row, read as typed values (numbers in the file's units converted to SI,
/// words of a fixed set, ids) with every problem reported at its file:line:column with a fix.
/// Shared by the readers of every input table (network files, cost table, and new ones).
pub(crate) struct Cells<'a, 'd> {
    table: &'a Table,
    row: &'a Row,
    units: UnitSystem,
    diags: &'d mut Diagnostics,
}

impl<'a, 'd> Cells<'a, 'd> {
    /// The cells of `row` of `table`, in the file's `units`; problems go to `diags`.
    pub(crate) fn new(
        table: &'a Table,
        row: &'a Row,
        units: UnitSystem,
        diags: &'d mut Diagnostics,
    ) -> Self {
        Cells {
            table,
            row,
            units,
            diags,
        }
    }

    /// The file name as shown in diagnostics.
    pub(crate) fn file(&self) -> &str {
        &self.table.file
    }

    /// The unit system of the file.
    pub(crate) fn units(&self) -> UnitSystem {
        self.units
    }

    /// Where findings of a reader's own checks go.
    pub(crate) fn diagnostics(&mut self) -> &mut Diagnostics {
        self.diags
    }

    pub(crate) fn cell(&self, name: &'a str) -> Cell<'a> {
        self.table.cell(self.row, name)
    }

    pub(crate) fn text(&self, name: &'a str) -> Option<&'a str> {
        let cell = self.cell(name);
        (!cell.is_empty()).then_some(cell.text)
    }

    pub(crate) fn id(&mut self, name: &'a str) -> Option<Cell<'a>> {
        let cell = self.cell(name);
        if cell.is_empty() {
            let loc = cell.location(self.file());
            self.diags
                .error(loc, "the id is empty", "give every element an id");
            return None;
        }
        // Messages quote ids between backticks: an id that holds one, or a control character,
        // could not be told apart from the message around it.
        if cell.text.chars().any(|c| c == '`' || c.is_control()) {
            let loc = cell.location(self.file());
            self.diags.error(
                loc,
                format!(
                    "the id {} holds a backtick or a control character",
                    quoted(cell.text)
                ),
                "write ids without ` and control characters (letters, digits and - _ . / are safe)",
            );
            return None;
        }
        Some(cell)
    }

    /// A number without unit conversion; `None` when empty or not a number (an error then).
    pub(crate) fn plain(&mut self, name: &'a str) -> Option<f64> {
        let cell = self.cell(name);
        if cell.is_empty() {
            return None;
        }
        match cell.text.parse::<f64>() {
            Ok(v) if v.is_finite() => Some(v),
            _ => {
                let loc = cell.location(self.file());
                self.diags.error(
                    loc,
                    format!(
                        "{} is not a finite number (column `{name}`)",
                        quoted(cell.text)
                    ),
                    "write a plain decimal number such as 12.5 or 1.25e1",
                );
                None
            }
        }
    }

    pub(crate) fn required_plain(&mut self, name: &'a str) -> Option<f64> {
        let cell = self.cell(name);
        if cell.is_empty() {
            let loc = cell.location(self.file());
            self.diags.error(
                loc,
                format!("`{name}` is empty"),
                format!("give a value for `{name}`"),
            );
            return None;
        }
        self.plain(name)
    }

    /// A number in the file's unit of `q`, converted to SI.
    pub(crate) fn number(&mut self, name: &'a str, q: Quantity) -> Option<f64> {
        self.plain(name).map(|v| self.units.to_si(q, v))
    }

    pub(crate) fn required_number(&mut self, name: &'a str, q: Quantity) -> Option<f64> {
        self.required_plain(name).map(|v| self.units.to_si(q, v))
    }

    /// A positive number without unit conversion, for a table whose every value is required
    /// and positive (the cost table): one message for an empty cell, a cell that is not a
    /// number and a number that is not positive; `fix` says what to give.
    pub(crate) fn positive_plain(&mut self, name: &'a str, fix: &str) -> Option<f64> {
        let cell = self.cell(name);
        match cell.text.parse::<f64>() {
            Ok(v) if v.is_finite() && v > 0.0 => Some(v),
            _ => {
                let loc = cell.location(self.file());
                self.diags.error(
                    loc,
                    format!(
                        "{} is not a positive number (column `{name}`)",
                        quoted(cell.text)
                    ),
                    fix,
                );
                None
            }
        }
    }

    fn check(
        &mut self,
        value: Option<f64>,
        name: &'a str,
        fix: &str,
        ok: fn(f64) -> bool,
        rule: &str,
    ) -> Option<f64> {
        let v = value?;
        if ok(v) {
            return Some(v);
        }
        let cell = self.cell(name);
        let loc = cell.location(self.file());
        self.diags.error(
            loc,
            format!("`{name}` must be {rule}, got {}", cell.text),
            fix,
        );
        None
    }

    /// Refuses a value (SI) beyond `limit`: a magnitude no water system has.
    pub(crate) fn within(
        &mut self,
        value: Option<f64>,
        name: &'a str,
        limit: &Limit,
    ) -> Option<f64> {
        let v = value?;
        if limit.holds(v) {
            return Some(v);
        }
        let cell = self.cell(name);
        let loc = cell.location(self.file());
        // The value as written: converting 1e308 psi to kPa would overflow to infinity.
        let written = cell
            .text
            .parse::<f64>()
            .unwrap_or_else(|_| limit.quantity.map_or(v, |q| self.units.from_si(q, v)));
        let what = format!("`{name}`");
        self.diags.error(
            loc,
            limit.message(&what, written, self.units),
            limit.fix(&what, self.units),
        );
        None
    }

    pub(crate) fn positive(&mut self, value: Option<f64>, name: &'a str, fix: &str) -> Option<f64> {
        self.check(value, name, fix, |v| v > 0.0, "positive")
    }

    pub(crate) fn non_negative(
        &mut self,
        value: Option<f64>,
        name: &'a str,
        fix: &str,
    ) -> Option<f64> {
        self.check(value, name, fix, |v| v >= 0.0, "zero or more")
    }

    /// One of a fixed set of words, compared without case; `default` when empty.
    pub(crate) fn choice<T: Copy>(
        &mut self,
        name: &'a str,
        options: &[(&str, T)],
        default: Option<T>,
    ) -> Option<T> {
        let cell = self.cell(name);
        if cell.is_empty() {
            if default.is_none() {
                let loc = cell.location(self.file());
                let words: Vec<&str> = options.iter().map(|(w, _)| *w).collect();
                self.diags.error(
                    loc,
                    format!("`{name}` is empty"),
                    format!("write one of: {}", words.join(", ")),
                );
            }
            return default;
        }
        let lower = cell.text.to_ascii_lowercase();
        if let Some((_, v)) = options.iter().find(|(w, _)| *w == lower) {
            return Some(*v);
        }
        let loc = cell.location(self.file());
        let words: Vec<&str> = options.iter().map(|(w, _)| *w).collect();
        self.diags.error(
            loc,
            format!("unknown {name} {}", quoted(cell.text)),
            format!("write one of: {}", words.join(", ")),
        );
        None
    }

    /// Optional map coordinates; both or neither.
    pub(crate) fn position(&mut self) -> Option<[f64; 2]> {
        let x = self.plain("x");
        let y = self.plain("y");
        match (x, y) {
            (Some(x), Some(y)) => Some([x, y]),
            (None, None) => None,
            _ => {
                let loc = Location::line(self.file(), self.row.line);
                self.diags.warning(
                    loc,
                    "only one of the coordinates x, y is given; the position is ignored",
                    "give both x and y, or neither",
                );
                None
            }
        }
    }
}

/// Reads `path` (shown as `file` in diagnostics). Problems go to `diags`; `None` when the file
/// could not be read as a table at all.
pub fn read_table(
    path: &Path,
    file: &str,
    spec: &TableSpec<'_>,
    diags: &mut Diagnostics,
) -> Option<Table> {
    let bytes = match read_bounded(path) {
        Ok(bytes) => bytes,
        Err(message) => {
            diags.error(
                Location::file(file),
                message,
                "check the path and that the file is a readable CSV file",
            );
            return None;
        }
    };
    parse_table(&bytes, file, spec, diags)
}

fn read_bounded(path: &Path) -> Result<Vec<u8>, String> {
    let meta = std::fs::metadata(path).map_err(|e| format!("cannot read the file: {e}"))?;
    if !meta.is_file() {
        return Err("is not a regular file".into());
    }
    if meta.len() > MAX_INPUT_BYTES {
        return Err(format!(
            "the file is {} bytes, more than the {} bytes firemain reads",
            meta.len(),
            MAX_INPUT_BYTES
        ));
    }
    std::fs::read(path).map_err(|e| format!("cannot read the file: {e}"))
}

/// Parses CSV bytes; separate from [`read_table`] so that tests can feed bytes directly.
///
/// In steps: line ends and byte-order mark, the file's shape (delimiter, quotes), its records
/// (header and rows, each row kept or refused whole), then the header's columns.
pub fn parse_table(
    bytes: &[u8],
    file: &str,
    spec: &TableSpec<'_>,
    diags: &mut Diagnostics,
) -> Option<Table> {
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    // Old Mac files end lines with a lone CR. The csv reader takes a lone CR as a line end, but
    // a comment runs to the next LF, so a leading comment would swallow the whole file; read
    // every lone CR as an LF instead (line numbers do not change: LineIndex counts both).
    let normalized;
    let bytes = if has_lone_cr_line_ends(bytes) {
        diags.note(
            Location::file(file),
            "the lines end with a lone CR (old Mac style); firemain reads each CR as a line end",
        );
        normalized = lone_cr_to_lf(bytes);
        &normalized[..]
    } else {
        bytes
    };
    let lines = LineIndex::new(bytes);
    if !shape_is_csv(bytes, &lines, file, diags) {
        return None;
    }
    let records = read_records(bytes, &lines, file, diags)?;
    let Some((header_line, names)) = records.header else {
        diags.error(
            Location::file(file),
            "the file is empty",
            format!(
                "start the file with a header row naming its columns, at least: {}",
                spec.required.join(", ")
            ),
        );
        return None;
    };
    let columns = header_columns(&names, header_line, file, spec, diags)?;
    Some(Table {
        file: file.to_string(),
        columns,
        rows: records.rows,
        refused: records.refused,
    })
}

/// Whether the file is comma-separated and closes every quote it opens; otherwise the one
/// finding that explains it (a reading of such a file would only add noise).
fn shape_is_csv(bytes: &[u8], lines: &LineIndex, file: &str, diags: &mut Diagnostics) -> bool {
    if let Some((line, delimiter)) = foreign_delimiter(bytes) {
        diags.error(
            Location::line(file, line),
            format!(
                "{file} uses {delimiter} as its delimiter; firemain reads comma-separated files: the header is one column"
            ),
            format!(
                "save the file as comma-separated values (CSV with commas), or replace each {delimiter} between fields by a comma"
            ),
        );
        return false;
    }
    // The csv reader takes a quote left open as running to the end of the file; a file that
    // does that is broken, and the finding belongs where the quote opened.
    if let Some(line) = unclosed_quote_line(bytes, lines) {
        diags.error(
            Location::line(file, line),
            "a quoted field that starts on this line is never closed",
            "add the closing double quote (a quote inside a quoted field is written twice: \"\")",
        );
        return false;
    }
    true
}

/// A file's records: its header (the first non-blank record, with its line) and its rows.
struct Records {
    header: Option<(u64, Vec<String>)>,
    rows: Vec<Row>,
    refused: Vec<Row>,
}

/// Reads every record; a row with the wrong number of fields or a bad cell is refused whole
/// (and reported). `None` when the csv reader itself fails (reported at its line).
fn read_records(
    bytes: &[u8],
    lines: &LineIndex,
    file: &str,
    diags: &mut Diagnostics,
) -> Option<Records> {
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .comment(Some(b'#'))
        .flexible(true)
        .trim(csv::Trim::All)
        .from_reader(bytes);
    let mut records = Records {
        header: None,
        rows: Vec::new(),
        refused: Vec::new(),
    };
    let mut record = csv::ByteRecord::new();
    loop {
        match reader.read_byte_record(&mut record) {
            Ok(false) => break,
            Ok(true) => {}
            Err(e) => {
                let line = e.position().map(|p| lines.line_of(p.byte())).unwrap_or(0);
                diags.error(
                    Location::line(file, line),
                    format!("not readable as CSV: {}", csv_error_text(&e)),
                    "check quotes on this line: a quoted field must end with a closing quote",
                );
                return None;
            }
        }
        let line = record
            .position()
            .map(|p| lines.line_of(p.byte()))
            .unwrap_or(0);
        let (fields, cells_ok) = record_fields(&record, line, file, diags);
        if fields.iter().all(String::is_empty) {
            continue; // blank line
        }
        let Some((_, names)) = &records.header else {
            records.header = Some((line, fields));
            continue;
        };
        let extra_filled = fields.iter().skip(names.len()).any(|f| !f.is_empty());
        if fields.len() < names.len() || extra_filled {
            diags.error(
                Location::line(file, line),
                format!(
                    "this row has {} fields but the header has {}",
                    fields.len(),
                    names.len()
                ),
                "give every row one field per header column (an empty field means the default); \
                 quote fields that contain commas",
            );
            records.refused.push(Row { line, fields });
        } else if cells_ok {
            records.rows.push(Row { line, fields });
        } else {
            records.refused.push(Row { line, fields });
        }
    }
    Some(records)
}

/// A record's fields as text, and whether every one was readable (a field over several lines
/// or not UTF-8 is reported and read as empty).
fn record_fields(
    record: &csv::ByteRecord,
    line: u64,
    file: &str,
    diags: &mut Diagnostics,
) -> (Vec<String>, bool) {
    let mut fields = Vec::with_capacity(record.len());
    let mut cells_ok = true;
    for (i, raw) in record.iter().enumerate() {
        if raw.iter().any(|&b| b == b'\n' || b == b'\r') {
            diags.error(
                Location::cell(file, line, i as u64 + 1),
                "a quoted field runs over several lines",
                "close the quote on the line where it opens; network files keep one row per line",
            );
            cells_ok = false;
            fields.push(String::new());
            continue;
        }
        match std::str::from_utf8(raw) {
            Ok(text) => fields.push(text.to_string()),
            Err(_) => {
                diags.error(
                    Location::cell(file, line, i as u64 + 1),
                    "the text is not valid UTF-8",
                    "save the file with UTF-8 encoding",
                );
                cells_ok = false;
                fields.push(String::new());
            }
        }
    }
    (fields, cells_ok)
}

/// The header's columns by lower-case name; a column named twice or a required one missing is
/// an error (`None`), columns the reader does not use are noted as ignored.
fn header_columns(
    names: &[String],
    header_line: u64,
    file: &str,
    spec: &TableSpec<'_>,
    diags: &mut Diagnostics,
) -> Option<HashMap<String, usize>> {
    let mut columns = HashMap::new();
    let mut unknown = Vec::new();
    let mut ok = true;
    for (i, raw) in names.iter().enumerate() {
        let name = raw.trim().to_ascii_lowercase();
        if columns.contains_key(&name) {
            diags.error(
                Location::cell(file, header_line, i as u64 + 1),
                format!("column {} appears twice in the header", quoted(&name)),
                "remove or rename one of the two columns",
            );
            ok = false;
            continue;
        }
        if !spec.known.contains(&name.as_str()) {
            unknown.push(raw.clone());
        }
        columns.insert(name, i);
    }
    for required in spec.required {
        if !columns.contains_key(*required) {
            diags.error(
                Location::line(file, header_line),
                format!("required column `{required}` is missing"),
                format!(
                    "add a `{required}` column to the header (columns: {})",
                    spec.known.join(", ")
                ),
            );
            ok = false;
        }
    }
    if !unknown.is_empty() {
        diags.note(
            Location::line(file, header_line),
            format!(
                "ignored columns: {}",
                unknown
                    .iter()
                    .map(|c| quoted(c))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        );
    }
    ok.then_some(columns)
}

/// Whether the file's lines end with lone CRs: a CR not followed by LF, and no LF at all.
fn has_lone_cr_line_ends(bytes: &[u8]) -> bool {
    !bytes.contains(&b'\n') && bytes.contains(&b'\r')
}

fn lone_cr_to_lf(bytes: &[u8]) -> Vec<u8> {
    bytes
        .iter()
        .map(|&b| if b == b'\r' { b'\n' } else { b })
        .collect()
}

/// The header line and the delimiter, when the header (the first line that is not blank or a
/// comment) is split by semicolons, tabs or bars rather than commas, as spreadsheets write
/// where the comma is the decimal mark. Characters inside quotes are not counted.
fn foreign_delimiter(bytes: &[u8]) -> Option<(u64, &'static str)> {
    let mut line_no = 0u64;
    for line in bytes.split(|&b| b == b'\n') {
        line_no += 1;
        let line = line.strip_suffix(b"\r").unwrap_or(line);
        if line.iter().all(u8::is_ascii_whitespace) || line.first() == Some(&b'#') {
            continue;
        }
        let mut quoted = false;
        let mut counts = [0usize; 4];
        for &b in line {
            match b {
                b'"' => quoted = !quoted,
                _ if quoted => {}
                b',' => counts[0] += 1,
                b';' => counts[1] += 1,
                b'\t' => counts[2] += 1,
                b'|' => counts[3] += 1,
                _ => {}
            }
        }
        let names = ["','", "';'", "a tab", "'|'"];
        let (best, &n) = counts.iter().enumerate().max_by_key(|&(_, n)| *n)?;
        return (best != 0 && n > counts[0]).then_some((line_no, names[best]));
    }
    None
}

/// The line of a double quote that opens a quoted field and is never closed, if any.
/// Quotes toggle a quoted state (an escaped quote `""` toggles twice); comment lines outside
/// quotes are skipped as the csv reader skips them.
fn unclosed_quote_line(bytes: &[u8], lines: &LineIndex<'_>) -> Option<u64> {
    let mut quoted = false;
    let mut opened_at = 0usize;
    let mut at_line_start = true;
    let mut in_comment = false;
    for (i, &b) in bytes.iter().enumerate() {
        let line_end = b == b'\n' || b == b'\r';
        if in_comment {
            if line_end {
                in_comment = false;
                at_line_start = true;
            }
            continue;
        }
        if at_line_start && !quoted && b == b'#' {
            in_comment = true;
            continue;
        }
        at_line_start = line_end && !quoted;
        if b == b'"' {
            quoted = !quoted;
            if quoted {
                opened_at = i;
            }
        }
    }
    quoted.then(|| lines.line_of_byte(opened_at as u64))
}

/// Line numbers from byte offsets. The csv reader's position of a record is where it started
/// reading, which is before any comment or blank lines that precede the record, so firemain
/// skips those itself and counts lines from the byte offset.
struct LineIndex<'a> {
    bytes: &'a [u8],
    newlines: Vec<u64>,
}

impl<'a> LineIndex<'a> {
    /// Line ends are LF, CRLF, or a lone CR (as the csv reader accepts all three).
    fn new(bytes: &'a [u8]) -> Self {
        let newlines = bytes
            .iter()
            .enumerate()
            .filter(|&(i, &b)| b == b'\n' || (b == b'\r' && bytes.get(i + 1) != Some(&b'\n')))
            .map(|(i, _)| i as u64)
            .collect();
        LineIndex { bytes, newlines }
    }

    /// 1-based line of byte `offset`.
    fn line_of_byte(&self, offset: u64) -> u64 {
        self.newlines.partition_point(|&n| n < offset) as u64 + 1
    }

    /// 1-based line of the first record that starts at or after byte `offset`.
    fn line_of(&self, offset: u64) -> u64 {
        let mut line = self.newlines.partition_point(|&n| n < offset);
        let mut start = offset as usize;
        loop {
            let rest = &self.bytes[start.min(self.bytes.len())..];
            let skip = matches!(rest.first(), Some(b'#') | Some(b'\r') | Some(b'\n'));
            if !skip || line >= self.newlines.len() {
                break;
            }
            start = self.newlines[line] as usize + 1;
            line += 1;
        }
        line as u64 + 1
    }
}

fn csv_error_text(e: &csv::Error) -> String {
    match e.kind() {
        csv::ErrorKind::Io(io) => io.to_string(),
        _ => e.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const SPEC: TableSpec<'static> = TableSpec {
        known: &["id", "elevation", "demand"],
        required: &["id", "elevation"],
    };

    fn parse(text: &[u8]) -> (Option<Table>, Diagnostics) {
        let mut d = Diagnostics::new();
        let t = parse_table(text, "junctions.csv", &SPEC, &mut d);
        (t, d)
    }

    #[test]
    fn reads_bom_crlf_comments_quotes_any_order_and_notes_extra_columns() {
        let text = b"\xEF\xBB\xBF# exported\r\nElevation, ID ,demand,Owner\r\n# c\r\n10,\"J, 1\",,x\r\n\r\n12.5e0,J2,3,y\r\n";
        let (t, d) = parse(text);
        let t = t.expect("table");
        assert_eq!(t.rows().len(), 2);
        let r = &t.rows()[0];
        assert_eq!(t.cell(r, "id").text, "J, 1");
        assert_eq!(t.cell(r, "demand").text, "");
        assert_eq!(t.cell(r, "id").line, 4);
        assert_eq!(t.cell(r, "id").column, 2);
        assert_eq!(t.cell(&t.rows()[1], "elevation").text, "12.5e0");
        assert!(!d.has_errors());
        assert_eq!(d.len(), 1, "one note for the extra column: {d}");
    }

    #[test]
    fn empty_and_header_only() {
        let (t, d) = parse(b"");
        assert!(t.is_none());
        assert!(d.to_string().contains("empty"), "{d}");
        let (t, d) = parse(b"id,elevation\n");
        assert_eq!(t.expect("table").rows().len(), 0);
        assert!(!d.has_errors());
    }

    #[test]
    fn foreign_delimiters_are_named() {
        let (t, d) = parse(b"# from a spreadsheet\nid;elevation;demand\nJ1;100;10,5\n");
        assert!(t.is_none());
        assert!(
            d.to_string()
                .contains("junctions.csv:2: error: junctions.csv uses ';' as its delimiter"),
            "{d}"
        );
        let (_, d) = parse(b"id\televation\nJ1\t100\n");
        assert!(d.to_string().contains("uses a tab as its delimiter"), "{d}");
        let (t, _) = parse(b"id,elevation,\"a;b;c;d\"\nJ1,100,x\n");
        assert!(t.is_some());
    }

    #[test]
    fn lone_cr_line_ends_with_a_leading_comment() {
        let (t, d) = parse(b"# exported\rid,elevation\rJ1,100\r\rJ2,1x5\r");
        let t = t.expect("table");
        assert_eq!(t.rows().len(), 2);
        assert_eq!(t.rows()[1].line, 5);
        assert!(d.to_string().contains("lone CR"), "{d}");
    }

    #[test]
    fn missing_required_column_and_ragged_row_and_bad_utf8() {
        let (t, d) = parse(b"id,demand\nJ1,2\n");
        assert!(t.is_none());
        assert!(d.to_string().contains("`elevation` is missing"), "{d}");
        let (_, d) = parse(b"id,elevation\nJ1,2,3\n");
        assert!(d.to_string().contains("junctions.csv:2"), "{d}");
        let (_, d) = parse(b"id,elevation\nJ\xff1,2\n");
        assert!(d.to_string().contains("junctions.csv:2:1"), "{d}");
        let (_, d) = parse(b"id,elevation\n\"J1,2\n");
        assert!(d.has_errors(), "{d}");
    }
}
