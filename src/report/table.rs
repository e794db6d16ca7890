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

/// The terminal: a section is its title on a line of its own, then its blocks without blank
/// lines between them; tables are drawn with box-drawing lines.
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

impl Markup for Terminal {
    fn table(&self, table: &Table) -> String {
        let mut b = Builder::default();
        if let Some(h) = &table.header {
            b.push_record(h.clone());
        }
        for r in &table.rows {
            b.push_record(r.clone());
        }
        let mut t = b.build();
        t.with(Style::sharp());
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
            s.push_str(&format!("{t}\n"));
        }
        for b in &section.blocks {
            match b {
                Block::Paragraph(t) => s.push_str(&format!("{}\n", Self::text(t))),
                Block::List(items) => {
                    for item in items {
                        s.push_str(&format!("- {}\n", Self::text(item)));
                    }
                }
                Block::Table(t) => s.push_str(&format!("{}\n", self.table(t))),
                Block::Section(sub) => s.push_str(&self.section(sub, 0)),
            }
        }
        s
    }

    fn document(&self, doc: &Document) -> String {
        let mut s = format!("{}\n", doc.title);
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
