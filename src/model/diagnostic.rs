//! Input diagnostics: what is wrong, where (file, line, column), and how to fix it.
//!
//! Readers and validators never stop at the first problem: they push every finding into a
//! [`Diagnostics`] list, errors apart from warnings, and the caller decides what to do.

use std::fmt;

/// How bad a finding is.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum Severity {
    /// The input cannot be analysed until this is fixed.
    Error,
    /// Plausibility: the input can be analysed, but this looks wrong (common practice, no source).
    Warning,
    /// For information only (e.g. extra columns that were ignored).
    Note,
}

impl fmt::Display for Severity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Severity::Error => "error",
            Severity::Warning => "warning",
            Severity::Note => "note",
        })
    }
}

/// Input text quoted in a message: between backticks, with a backtick inside shown as `'` and
/// control characters escaped (`\u{0}`), so that where the quoted text ends stays plain and no
/// raw control byte reaches the terminal (a header cell held both; found by coverage-guided
/// fuzzing). Text longer than [`QUOTED_MAX_CHARS`] is cut there and marked with `…`: a message
/// is one line, and a stray quote in a file can make a "value" of thousands of characters.
pub fn quoted(text: &str) -> String {
    let mut out = String::with_capacity(text.len().min(4 * QUOTED_MAX_CHARS) + 4);
    out.push('`');
    let long = text.chars().nth(QUOTED_MAX_CHARS).is_some();
    let kept = if long {
        QUOTED_MAX_CHARS - 1
    } else {
        QUOTED_MAX_CHARS
    };
    for c in text.chars().take(kept) {
        match c {
            '`' => out.push('\''),
            c if c.is_control() => out.extend(c.escape_default()),
            c => out.push(c),
        }
    }
    if long {
        out.push('…');
    }
    out.push('`');
    out
}

/// The most characters of input text a message quotes (see [`quoted`]).
pub const QUOTED_MAX_CHARS: usize = 80;

/// Where a finding is: a file, and where known a line and a column (1-based; the column is the
/// field number in a CSV row, or the character column in a TOML file).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Location {
    pub file: String,
    pub line: Option<u64>,
    pub column: Option<u64>,
}

impl Location {
    /// The whole file.
    pub fn file(file: impl Into<String>) -> Self {
        Location {
            file: file.into(),
            line: None,
            column: None,
        }
    }

    /// A line of a file.
    pub fn line(file: impl Into<String>, line: u64) -> Self {
        Location {
            file: file.into(),
            line: Some(line),
            column: None,
        }
    }

    /// A cell of a file.
    pub fn cell(file: impl Into<String>, line: u64, column: u64) -> Self {
        Location {
            file: file.into(),
            line: Some(line),
            column: Some(column),
        }
    }
}

impl fmt::Display for Location {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.file)?;
        if let Some(line) = self.line {
            write!(f, ":{line}")?;
            if let Some(column) = self.column {
                write!(f, ":{column}")?;
            }
        }
        Ok(())
    }
}

/// One finding about the input.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Diagnostic {
    pub severity: Severity,
    pub location: Location,
    /// What is wrong, with the offending value and its unit where there is one.
    pub message: String,
    /// How to fix it, where that is not obvious from the message.
    pub fix: Option<String>,
}

impl fmt::Display for Diagnostic {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}: {}", self.location, self.severity, self.message)?;
        if let Some(fix) = &self.fix {
            write!(f, "; fix: {fix}")?;
        }
        Ok(())
    }
}

/// Every finding of a load or a validation, in the order found.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Diagnostics {
    items: Vec<Diagnostic>,
}

impl Diagnostics {
    pub fn new() -> Self {
        Self::default()
    }

    pub fn push(
        &mut self,
        severity: Severity,
        location: Location,
        message: impl Into<String>,
        fix: Option<String>,
    ) {
        self.items.push(Diagnostic {
            severity,
            location,
            message: message.into(),
            fix,
        });
    }

    /// Records an error with a fix.
    pub fn error(
        &mut self,
        location: Location,
        message: impl Into<String>,
        fix: impl Into<String>,
    ) {
        self.push(Severity::Error, location, message, Some(fix.into()));
    }

    /// Records a plausibility warning with a suggestion.
    pub fn warning(
        &mut self,
        location: Location,
        message: impl Into<String>,
        fix: impl Into<String>,
    ) {
        self.push(Severity::Warning, location, message, Some(fix.into()));
    }

    /// Records a note.
    pub fn note(&mut self, location: Location, message: impl Into<String>) {
        self.push(Severity::Note, location, message, None);
    }

    pub fn extend(&mut self, other: Diagnostics) {
        self.items.extend(other.items);
    }

    pub fn iter(&self) -> impl Iterator<Item = &Diagnostic> {
        self.items.iter()
    }

    pub fn is_empty(&self) -> bool {
        self.items.is_empty()
    }

    pub fn len(&self) -> usize {
        self.items.len()
    }

    pub fn count(&self, severity: Severity) -> usize {
        self.items.iter().filter(|d| d.severity == severity).count()
    }

    pub fn has_errors(&self) -> bool {
        self.items.iter().any(|d| d.severity == Severity::Error)
    }

    /// The findings sorted for display: errors first, then warnings, then notes, each in the
    /// order found (which follows file and line order).
    pub fn sorted(&self) -> Vec<&Diagnostic> {
        let mut out: Vec<&Diagnostic> = self.items.iter().collect();
        out.sort_by_key(|d| d.severity);
        out
    }
}

impl fmt::Display for Diagnostics {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for d in self.sorted() {
            writeln!(f, "{d}")?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::quoted;

    /// Common practice, no source: the quoted text keeps its characters, except a backtick
    /// (which would end the quote) and control characters (which would reach the terminal).
    #[test]
    fn quoted_text_cannot_end_its_quote_or_hold_control_bytes() {
        assert_eq!(quoted("FT-60"), "`FT-60`");
        assert_eq!(quoted("a`b"), "`a'b`");
        assert_eq!(quoted("a\u{0}b\n"), "`a\\u{0}b\\n`");
        assert_eq!(quoted("水 é"), "`水 é`");
        // Long text is cut to 80 characters, the last an ellipsis (common practice, no source).
        let long = "x".repeat(500);
        let q = quoted(&long);
        assert_eq!(q.chars().count(), 82);
        assert!(q.ends_with("x…`"));
        assert_eq!(quoted(&"y".repeat(80)), format!("`{}`", "y".repeat(80)));
    }
}
