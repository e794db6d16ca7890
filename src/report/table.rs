//! The document model every report draws: tables, text and titled sections, in order.
//!
//! A report builds a [`Document`] (or single [`Section`]s) once, from its data, with no markup
//! in it; a [`Markup`] format draws it. Markdown and the terminal draw it today, and a new format
//! (HTML, say) is one more implementation of [`Markup`]. The model holds raw text: each format
//! escapes it by its own rules.

use tabled::builder::Builder;
use tabled::settings::object::Columns;
use tabled::settings::{Alignment, Style};

/// Horizontal alignment of a table column.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Align {
    #[default]
    Left,
    Right,
}

/// A table: an optional header row, rows of cells, and an alignment per column.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Table {
    /// `None` for a table of facts whose columns need no titles.
    pub header: Option<Vec<String>>,
    pub rows: Vec<Vec<String>>,
    /// One per column; columns beyond its end are left-aligned.
    pub align: Vec<Align>,
}

impl Table {
    /// A table with titled columns, all left-aligned.
    pub fn new(header: Vec<String>) -> Self {
        Table {
            header: Some(header),
            ..Table::default()
        }
    }

    /// A table without a header row.
    pub fn untitled() -> Self {
        Table::default()
    }

    /// A table of facts: a label and its value per row, without a header.
    pub fn facts<'a>(rows: impl IntoIterator<Item = (&'a str, String)>) -> Self {
        Table::untitled().with_rows(rows.into_iter().map(|(k, v)| vec![k.to_string(), v]))
    }

    /// Adds a row.
    pub fn push(&mut self, row: Vec<String>) {
        self.rows.push(row);
    }

    /// Adds rows.
    pub fn with_rows(mut self, rows: impl IntoIterator<Item = Vec<String>>) -> Self {
        self.rows.extend(rows);
        self
    }

    /// The number of columns: the widest of the header and the rows.
    pub fn columns(&self) -> usize {
        self.rows
            .iter()
            .map(Vec::len)
            .chain(self.header.as_ref().map(Vec::len))
            .max()
            .unwrap_or(0)
    }

    /// The alignment of column `c`.
    pub fn align_of(&self, c: usize) -> Align {
        self.align.get(c).copied().unwrap_or_default()
    }

    /// The table without the columns whose header is one of `headers` (a shorter view of the
    /// same rows, for the terminal).
    pub fn without_columns(self, headers: &[&str]) -> Table {
        let Some(header) = &self.header else {
            return self;
        };
        let keep: Vec<bool> = (0..self.columns())
            .map(|c| header.get(c).is_none_or(|h| !headers.contains(&h.as_str())))
            .collect();
        let pick = |cells: &[String]| -> Vec<String> {
            cells
                .iter()
                .enumerate()
                .filter(|(c, _)| keep.get(*c).copied().unwrap_or(true))
                .map(|(_, cell)| cell.clone())
                .collect()
        };
        Table {
            header: Some(pick(header)),
            rows: self.rows.iter().map(|r| pick(r)).collect(),
            align: (0..self.columns())
                .filter(|&c| keep[c])
                .map(|c| self.align_of(c))
                .collect(),
        }
    }
}

/// A piece of inline text.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Span {
    Plain(String),
    /// Text to stand out (a count of failures, the element a list item is about).
    Strong(String),
    /// A file location or other literal text, shown as it is.
    Code(String),
}

/// A run of inline text.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Text(pub Vec<Span>);

impl Text {
    pub fn new() -> Self {
        Text::default()
    }
    pub fn plain(mut self, s: impl Into<String>) -> Self {
        self.0.push(Span::Plain(s.into()));
        self
    }
    pub fn strong(mut self, s: impl Into<String>) -> Self {
        self.0.push(Span::Strong(s.into()));
        self
    }
    pub fn code(mut self, s: impl Into<String>) -> Self {
        self.0.push(Span::Code(s.into()));
        self
    }
}

impl From<String> for Text {
    fn from(s: String) -> Self {
        Text::new().plain(s)
    }
}

impl From<&str> for Text {
    fn from(s: &str) -> Self {
        Text::new().plain(s)
    }
}

/// A part of a section, drawn in order.
#[derive(Clone, Debug, PartialEq)]
pub enum Block {
    Paragraph(Text),
    /// A bulleted list, one text per item.
    List(Vec<Text>),
    Table(Table),
    /// A titled part one level down (a zone's hydrants inside the compliance table, say).
    Section(Section),
}

/// A titled part of a report; a section without a title draws only its blocks.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Section {
    pub title: Option<String>,
    pub blocks: Vec<Block>,
}

impl Section {
    pub fn titled(title: impl Into<String>) -> Self {
        Section {
            title: Some(title.into()),
            blocks: Vec::new(),
        }
    }
    pub fn untitled() -> Self {
        Section::default()
    }
    pub fn paragraph(mut self, text: impl Into<Text>) -> Self {
        self.blocks.push(Block::Paragraph(text.into()));
        self
    }
    pub fn list(mut self, items: impl IntoIterator<Item = Text>) -> Self {
        self.blocks.push(Block::List(items.into_iter().collect()));
        self
    }
    pub fn table(mut self, table: Table) -> Self {
        self.blocks.push(Block::Table(table));
        self
    }
    pub fn section(mut self, section: Section) -> Self {
        self.blocks.push(Block::Section(section));
        self
    }
}

/// A whole report: a title and its sections, in the order they are read.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Document {
    pub title: String,
    pub sections: Vec<Section>,
}

/// A format that draws the model.
pub trait Markup {
    /// A table on its own.
    fn table(&self, table: &Table) -> String;
    /// A section with its title at `level` (1 for a document's top sections), and its blocks.
    fn section(&self, section: &Section, level: usize) -> String;
    /// A whole document.
    fn document(&self, doc: &Document) -> String;
}

/// Markdown (CommonMark with pipe tables), as report.md and upsize_report.md are written.
///
/// The title is a level-1 heading, a document's sections level 2 and their parts level 3.
/// Every block is preceded by a blank line. Text is escaped so that it cannot break the line
/// structure or turn into markup: `|` as `\|`, a line break as a space, and a backslash before
/// each character that could start emphasis, code, a link, raw HTML or an entity (CommonMark
/// 0.31, §2.4 "Backslash escapes": any ASCII punctuation may be escaped). An `_` inside a word
/// cannot start emphasis (§6.2) and is left as it is, so `node_results.csv` stays readable.
/// `Code` spans are written as they are.
pub struct Markdown;

impl Markdown {
    fn escape(text: &str) -> String {
        let chars: Vec<char> = text.chars().collect();
        let mut s = String::with_capacity(text.len());
        for (i, &c) in chars.iter().enumerate() {
            let word = |k: Option<&char>| k.is_some_and(|c| c.is_alphanumeric());
            let escape = match c {
                '\\' | '`' | '*' | '<' | '>' | '&' | '[' | ']' | '|' => true,
                '_' => {
                    !(word(i.checked_sub(1).and_then(|k| chars.get(k))) && word(chars.get(i + 1)))
                }
                _ => false,
            };
            match c {
                '\n' | '\r' => s.push(' '),
                c if escape => {
                    s.push('\\');
                    s.push(c);
                }
                c => s.push(c),
            }
        }
        s
    }

    fn text(text: &Text) -> String {
        text.0
            .iter()
            .map(|span| match span {
                Span::Plain(s) => Self::escape(s),
                Span::Strong(s) => format!("**{}**", Self::escape(s)),
                Span::Code(s) => format!("`{s}`"),
            })
            .collect()
    }

    fn row(cells: &[String], columns: usize) -> String {
        let mut line = String::from("|");
        for c in 0..columns {
            match cells.get(c).map(|s| Self::escape(s)) {
                Some(cell) if !cell.is_empty() => line.push_str(&format!(" {cell} |")),
                // An empty cell of a data row keeps both spaces; an untitled header is bare.
                Some(_) => line.push_str("  |"),
                None => line.push_str(" |"),
            }
        }
        line.push('\n');
        line
    }

    fn block(&self, block: &Block, level: usize) -> String {
        match block {
            Block::Paragraph(t) => format!("\n{}\n", Self::text(t)),
            Block::List(items) => {
                let mut s = String::from("\n");
                for item in items {
                    s.push_str(&format!("- {}\n", Self::text(item)));
                }
                s
            }
            Block::Table(t) => format!("\n{}", self.table(t)),
            Block::Section(sub) => self.section(sub, level + 1),
        }
    }
}

impl Markup for Markdown {
    fn table(&self, table: &Table) -> String {
        let columns = table.columns();
        let mut s = match &table.header {
            Some(h) => Self::row(h, columns),
            None => Self::row(&[], columns),
        };
        s.push('|');
        for c in 0..columns {
            s.push_str(match table.align_of(c) {
                Align::Left => "---|",
                Align::Right => "---:|",
            });
        }
        s.push('\n');
        for r in &table.rows {
            s.push_str(&Self::row(r, columns));
        }
        s
    }

    fn section(&self, section: &Section, level: usize) -> String {
        let mut s = match &section.title {
            Some(t) => format!("\n{} {}\n", "#".repeat(level + 1), Self::escape(t)),
            None => String::new(),
        };
        for b in &section.blocks {
            s.push_str(&self.block(b, level));
        }
        s
    }

    fn document(&self, doc: &Document) -> String {
        let mut s = format!("# {}\n", Self::escape(&doc.title));
        for section in &doc.sections {
            s.push_str(&self.section(section, 1));
        }
        s
    }
}

/// The width, in characters, that everything firemain prints on the terminal fits in: a
/// common terminal width that leaves room beside a standard 80-column window's double (common
/// practice, no source). The files keep every text whole.
pub const TERMINAL_WIDTH: usize = 120;

/// The narrowest a text column is cut to when its words do not fit (the last resort).
const MIN_CUT_WIDTH: usize = 10;

/// The terminal: a section is its title on a line of its own, then its blocks without blank
/// lines between them; tables are drawn with box-drawing lines. Everything fits in
/// [`TERMINAL_WIDTH`] columns: text wraps, and a wider table wraps its headers, then its
/// widest text columns (numbers are never wrapped).
pub struct Terminal;

impl Terminal {
    fn text(text: &Text) -> String {
        text.0
            .iter()
            .map(|span| match span {
                Span::Plain(s) | Span::Strong(s) | Span::Code(s) => s.as_str(),
            })
            .collect()
    }
}

/// The number of characters of `s` (what a terminal shows for the text firemain prints).
fn chars(s: &str) -> usize {
    s.chars().count()
}

/// The pieces a text may be broken between: each ends after a space, or after a hyphen or
/// slash between two letters (so `hydrant-pressure` and `material/class` may break; a minus
/// sign, an id such as `HYD-124` or a unit such as `ft/1000` never).
fn pieces(text: &str) -> Vec<&str> {
    let mut out = Vec::new();
    let mut start = 0;
    let cs: Vec<(usize, char)> = text.char_indices().collect();
    for (k, &(i, c)) in cs.iter().enumerate() {
        let end = i + c.len_utf8();
        let joint_break = (c == '-' || c == '/')
            && k > 0
            && cs[k - 1].1.is_alphabetic()
            && cs.get(k + 1).is_some_and(|n| n.1.is_alphabetic());
        if c == ' ' || joint_break {
            out.push(&text[start..end]);
            start = end;
        }
    }
    if start < text.len() {
        out.push(&text[start..]);
    }
    out
}

/// The longest piece of `text` that [`wrap`] keeps whole.
fn longest_piece(text: &str) -> usize {
    pieces(text)
        .iter()
        .map(|p| chars(p.trim_end()))
        .max()
        .unwrap_or(0)
}

/// `text` in lines of at most `width` characters (at least 1), broken between words and after
/// the hyphen of a compound; a word longer than the width is cut.
pub fn wrap(text: &str, width: usize) -> Vec<String> {
    let width = width.max(1);
    let mut lines = Vec::new();
    let mut line = String::new();
    for piece in pieces(text) {
        if !line.is_empty() && chars(&line) + chars(piece.trim_end()) > width {
            lines.push(line.trim_end().to_string());
            line.clear();
        }
        line.push_str(piece);
        while chars(line.trim_end()) > width {
            let cut: String = line.chars().take(width).collect();
            line = line.chars().skip(width).collect();
            lines.push(cut);
        }
    }
    if !line.trim_end().is_empty() || lines.is_empty() {
        lines.push(line.trim_end().to_string());
    }
    lines
}

/// `first` then `text`, wrapped to [`TERMINAL_WIDTH`], its further lines indented under the
/// start of `text` ("Reference:  ...", "- item").
pub fn hanging(first: &str, text: &str) -> String {
    let indent = chars(first);
    let lines = wrap(text, TERMINAL_WIDTH.saturating_sub(indent).max(20));
    let mut s = String::new();
    for (k, line) in lines.iter().enumerate() {
        if k == 0 {
            s.push_str(first);
        } else {
            s.push_str(&" ".repeat(indent));
        }
        s.push_str(line);
        s.push('\n');
    }
    s
}

/// Whether every filled data cell of column `c` is a number (a percentage counts).
fn is_numeric(table: &Table, c: usize) -> bool {
    let mut cells = table
        .rows
        .iter()
        .filter_map(|r| r.get(c))
        .filter(|s| !s.is_empty())
        .peekable();
    cells.peek().is_some() && cells.all(|s| s.trim_end_matches('%').parse::<f64>().is_ok())
}

/// Narrows the widest columns until the table is `excess` characters narrower or every column
/// is at its floor; returns what is still in excess. A column narrowed by one character takes
/// the width its cells then wrap to (`wrapped(c, w)`), which may be less.
fn narrow(
    widths: &mut [usize],
    floors: &[usize],
    mut excess: usize,
    wrapped: impl Fn(usize, usize) -> usize,
) -> usize {
    while excess > 0 {
        // The widest column above its floor; of equal ones, the rightmost (text columns
        // usually come last).
        let widest = (0..widths.len())
            .filter(|&c| widths[c] > floors[c])
            .max_by_key(|&c| (widths[c], c));
        let Some(c) = widest else { break };
        let w = wrapped(c, widths[c] - 1).clamp(floors[c], widths[c] - 1);
        excess = excess.saturating_sub(widths[c] - w);
        widths[c] = w;
    }
    excess
}

/// The column widths of `table` drawn in at most `width` characters: the natural widths when
/// they fit; else narrowed in three steps, each only as far as needed: headers wrap between
/// words; then text columns wrap between words (widest first); then text columns are cut, to
/// no less than [`MIN_CUT_WIDTH`]. A number is never wrapped.
fn column_widths(table: &Table, width: usize) -> Vec<usize> {
    let n = table.columns();
    let cell = |r: &Vec<String>, c: usize| r.get(c).map(|s| chars(s)).unwrap_or(0);
    let header = |c: usize| {
        table
            .header
            .as_ref()
            .and_then(|h| h.get(c))
            .map(String::as_str)
            .unwrap_or("")
    };
    let data_width: Vec<usize> = (0..n)
        .map(|c| table.rows.iter().map(|r| cell(r, c)).max().unwrap_or(0))
        .collect();
    let mut widths: Vec<usize> = (0..n)
        .map(|c| data_width[c].max(chars(header(c))))
        .collect();
    // Each column takes its width plus a space either side and a line; one more line closes
    // the table (tabled's sharp style).
    let frame = 3 * n + 1;
    let total: usize = widths.iter().sum::<usize>() + frame;
    if total <= width {
        return widths;
    }
    let numeric: Vec<bool> = (0..n).map(|c| is_numeric(table, c)).collect();
    let headers_wrapped: Vec<usize> = (0..n)
        .map(|c| data_width[c].max(longest_piece(header(c))))
        .collect();
    let words_wrapped: Vec<usize> = (0..n)
        .map(|c| {
            if numeric[c] {
                headers_wrapped[c]
            } else {
                let longest = table
                    .rows
                    .iter()
                    .filter_map(|r| r.get(c))
                    .map(|s| longest_piece(s))
                    .max()
                    .unwrap_or(0);
                longest.max(longest_piece(header(c)))
            }
        })
        .collect();
    let cut: Vec<usize> = (0..n)
        .map(|c| {
            if numeric[c] {
                headers_wrapped[c]
            } else {
                words_wrapped[c].min(MIN_CUT_WIDTH)
            }
        })
        .collect();
    // The width column `c`'s header and cells take when wrapped to `w`.
    let wrapped = |c: usize, w: usize| {
        table
            .header
            .iter()
            .chain(table.rows.iter())
            .filter_map(|r| r.get(c))
            .flat_map(|s| wrap(s, w))
            .map(|line| chars(&line))
            .max()
            .unwrap_or(0)
    };
    let mut excess = total - width;
    for floors in [&headers_wrapped, &words_wrapped, &cut] {
        excess = narrow(&mut widths, floors, excess, wrapped);
    }
    widths
}

/// `cells` wrapped to `widths`, each wrapped cell's lines joined by line breaks.
fn wrap_cells(cells: &[String], widths: &[usize]) -> Vec<String> {
    cells
        .iter()
        .enumerate()
        .map(|(c, s)| match widths.get(c) {
            Some(&w) if chars(s) > w => wrap(s, w).join("\n"),
            _ => s.clone(),
        })
        .collect()
}

impl Markup for Terminal {
    fn table(&self, table: &Table) -> String {
        let widths = column_widths(table, TERMINAL_WIDTH);
        let mut b = Builder::default();
        if let Some(h) = &table.header {
            b.push_record(wrap_cells(h, &widths));
        }
        let mut wrapped_rows = false;
        for r in &table.rows {
            let cells = wrap_cells(r, &widths);
            wrapped_rows |= cells.iter().any(|s| s.contains('\n'));
            b.push_record(cells);
        }
        let mut t = b.build();
        // Rows of several lines get a line between them, so that each row reads as one.
        if wrapped_rows {
            t.with(Style::modern());
        } else {
            t.with(Style::sharp());
        }
        for c in 0..table.columns() {
            if table.align_of(c) == Align::Right {
                t.modify(Columns::single(c), Alignment::right());
            }
        }
        t.to_string()
    }

    /// The terminal has no heading levels: a part of a section is drawn like a section.
    fn section(&self, section: &Section, _level: usize) -> String {
        let mut s = String::from("\n");
        if let Some(t) = &section.title {
            s.push_str(&hanging("", t));
        }
        for b in &section.blocks {
            match b {
                Block::Paragraph(t) => s.push_str(&hanging("", &Self::text(t))),
                Block::List(items) => {
                    for item in items {
                        s.push_str(&hanging("- ", &Self::text(item)));
                    }
                }
                Block::Table(t) => s.push_str(&format!("{}\n", self.table(t))),
                Block::Section(sub) => s.push_str(&self.section(sub, 0)),
            }
        }
        s
    }

    fn document(&self, doc: &Document) -> String {
        let mut s = hanging("", &doc.title);
        for section in &doc.sections {
            s.push_str(&self.section(section, 1));
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn strings(cells: &[&str]) -> Vec<String> {
        cells.iter().map(|s| s.to_string()).collect()
    }

    // The expected texts below are the CommonMark pipe-table layout (GitHub Flavored Markdown
    // spec, "Tables (extension)"), written out by hand: common practice, no further source.
    #[test]
    fn markdown_table_escapes_cells_and_keeps_empty_ones() {
        let t = Table::new(strings(&["a", "b"])).with_rows([strings(&["x|y", ""])]);
        assert_eq!(Markdown.table(&t), "| a | b |\n|---|---|\n| x\\|y |  |\n");
    }

    // CommonMark 0.31, §2.4 (backslash escapes) and §6.2 (intraword `_` is not emphasis).
    #[test]
    fn markdown_escapes_what_could_become_markup() {
        assert_eq!(
            Markdown::escape("H<1> & *x* [a] `c` _e_ node_results.csv \\"),
            "H\\<1\\> \\& \\*x\\* \\[a\\] \\`c\\` \\_e\\_ node_results.csv \\\\"
        );
    }

    #[test]
    fn markdown_untitled_table_has_a_bare_header() {
        let t = Table::untitled().with_rows([strings(&["k", "v"])]);
        assert_eq!(Markdown.table(&t), "| | |\n|---|---|\n| k | v |\n");
    }

    #[test]
    fn markdown_right_alignment_marks_the_divider() {
        let mut t = Table::new(strings(&["id", "flow"]));
        t.align = vec![Align::Left, Align::Right];
        assert_eq!(Markdown.table(&t), "| id | flow |\n|---|---:|\n");
    }

    #[test]
    fn markdown_sections_nest_one_level_down_with_blank_lines() {
        let doc = Document {
            title: "T".into(),
            sections: vec![Section::titled("S")
                .paragraph(Text::new().strong("2 fail").plain(", a|b"))
                .section(Section::titled("Sub").list([Text::new().code("f:1").plain(": m")]))],
        };
        assert_eq!(
            Markdown.document(&doc),
            "# T\n\n## S\n\n**2 fail**, a\\|b\n\n### Sub\n\n- `f:1`: m\n"
        );
    }

    // Greedy line filling between words: common practice, no source.
    #[test]
    fn wrap_breaks_between_words_and_compounds_never_in_numbers_or_ids() {
        assert_eq!(wrap("hydrant-pressure", 10), ["hydrant-", "pressure"]);
        assert_eq!(wrap("HYD-124 at -3018", 8), ["HYD-124", "at -3018"]);
        assert_eq!(wrap("abcdefghij", 4), ["abcd", "efgh", "ij"]);
        assert_eq!(wrap("", 5), [""]);
    }

    #[test]
    fn a_wide_terminal_table_wraps_titles_and_text_but_not_numbers() {
        let long = "word ".repeat(40);
        let t = Table::new(strings(&["flow (gpm)", "reasons"])).with_rows([vec![
            "-123456789012".to_string(),
            long.trim_end().to_string(),
        ]]);
        let drawn = Terminal.table(&t);
        assert!(drawn.lines().all(|l| l.chars().count() <= TERMINAL_WIDTH));
        assert!(drawn.contains("-123456789012"));
        // A narrow table is drawn as it is.
        let narrow = Table::new(strings(&["a b c"])).with_rows([strings(&["1"])]);
        assert!(Terminal.table(&narrow).contains("│ a b c │"));
    }

    #[test]
    fn without_columns_drops_columns_by_title() {
        let t = Table::new(strings(&["a", "b", "c"])).with_rows([strings(&["1", "2", "3"])]);
        let t = t.without_columns(&["b"]);
        assert_eq!(t.header, Some(strings(&["a", "c"])));
        assert_eq!(t.rows, vec![strings(&["1", "3"])]);
    }

    #[test]
    fn terminal_section_is_a_title_line_then_the_table() {
        let s = Section::titled("Pipes")
            .table(Table::new(strings(&["id"])).with_rows([strings(&["P-1"])]));
        assert_eq!(
            Terminal.section(&s, 1),
            "\nPipes\n┌─────┐\n│ id  │\n├─────┤\n│ P-1 │\n└─────┘\n"
        );
    }
}
