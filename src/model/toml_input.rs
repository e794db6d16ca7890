//! Reading a small TOML file (network `model.toml`, criteria files) with diagnostics that name
//! the file, line and column of the problem.

use std::path::Path;

use serde::de::DeserializeOwned;

use super::diagnostic::{quoted, Diagnostics, Location};

/// Largest TOML file read; these files are a few lines long.
const MAX_TOML_BYTES: u64 = 1 << 20;

/// Reads and deserializes `path` (shown as `file`); problems go to `diags`. Returns the value
/// and the text it was read from (without a byte-order mark), for locating later findings.
pub fn read_toml<T: DeserializeOwned>(
    path: &Path,
    file: &str,
    fix: &str,
    diags: &mut Diagnostics,
) -> Option<(T, String)> {
    let text = match read_text(path) {
        Ok(text) => text,
        Err(message) => {
            diags.error(Location::file(file), message, fix);
            return None;
        }
    };
    parse_toml(&text, file, fix, diags).map(|value| (value, text))
}

/// The location of byte range `span` of `text` in `file`.
pub fn span_location(file: &str, text: &str, span: std::ops::Range<usize>) -> Location {
    let (line, column) = line_and_column(text, span.start);
    Location::cell(file, line, column)
}

fn read_text(path: &Path) -> Result<String, String> {
    let meta = std::fs::metadata(path).map_err(|e| format!("cannot read the file: {e}"))?;
    if meta.len() > MAX_TOML_BYTES {
        return Err(format!(
            "the file is {} bytes; a settings file this large is not what firemain expects",
            meta.len()
        ));
    }
    let bytes = std::fs::read(path).map_err(|e| format!("cannot read the file: {e}"))?;
    let bytes = bytes
        .strip_prefix(b"\xEF\xBB\xBF")
        .unwrap_or(&bytes)
        .to_vec();
    String::from_utf8(bytes).map_err(|_| "the text is not valid UTF-8".to_string())
}

/// Deserializes TOML text; separate from [`read_toml`] so tests can feed text directly.
pub fn parse_toml<T: DeserializeOwned>(
    text: &str,
    file: &str,
    fix: &str,
    diags: &mut Diagnostics,
) -> Option<T> {
    match toml::from_str::<T>(text) {
        Ok(value) => Some(value),
        Err(e) => {
            let location = match e.span() {
                Some(span) => {
                    let (line, column) = line_and_column(text, span.start);
                    Location::cell(file, line, column)
                }
                None => Location::file(file),
            };
            // The parser's message can run over several lines; keep it on the located line.
            let message = e
                .message()
                .lines()
                .map(str::trim)
                .filter(|l| !l.is_empty())
                .collect::<Vec<_>>()
                .join("; ");
            diags.error(location, requote(&message), fix);
            None
        }
    }
}

/// The parser's "unknown variant `X`, expected ..." and "unknown field `X`, ..." with the
/// input's `X` quoted by [`quoted`]: serde writes it as given, and a backtick in it ended the
/// quote early (found by coverage-guided fuzzing). The name runs to the last "`, " before the
/// parser's own text, which never holds that sequence.
fn requote(message: &str) -> String {
    // "duplicate key `K` in table `T`" (or without the table): K and T from the input.
    if let Some(rest) = message
        .strip_prefix("duplicate key `")
        .and_then(|r| r.strip_suffix('`'))
    {
        return match rest.rfind("` in table `") {
            Some(i) => format!(
                "duplicate key {} in table {}",
                quoted(&rest[..i]),
                quoted(&rest[i + "` in table `".len()..])
            ),
            None => format!("duplicate key {}", quoted(rest)),
        };
    }
    for prefix in ["unknown variant `", "unknown field `"] {
        let Some(rest) = message.strip_prefix(prefix) else {
            continue;
        };
        let end = ["`, expected", "`, there are no"]
            .iter()
            .filter_map(|tail| rest.rfind(tail))
            .max();
        if let Some(end) = end {
            let name = &rest[..end];
            return format!(
                "{}{}{}",
                &prefix[..prefix.len() - 1],
                quoted(name),
                &rest[end + 1..]
            );
        }
    }
    message.to_string()
}

/// 1-based line and character column of byte offset `offset` in `text`.
pub fn line_and_column(text: &str, offset: usize) -> (u64, u64) {
    let offset = offset.min(text.len());
    let before = &text[..floor_char_boundary(text, offset)];
    let line = before.matches('\n').count() as u64 + 1;
    let column = before
        .rsplit('\n')
        .next()
        .map(|l| l.chars().count())
        .unwrap_or(0) as u64
        + 1;
    (line, column)
}

fn floor_char_boundary(text: &str, mut offset: usize) -> usize {
    while offset > 0 && !text.is_char_boundary(offset) {
        offset -= 1;
    }
    offset
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Common practice, no source: the name the input gave stays whole and plain.
    #[test]
    fn a_backtick_in_an_unknown_name_does_not_end_its_quote() {
        assert_eq!(
            requote("unknown variant `a`b`, expected `us` or `si`"),
            "unknown variant `a'b`, expected `us` or `si`"
        );
        assert_eq!(
            requote("unknown field `x`, expected one of `name`, `units`"),
            "unknown field `x`, expected one of `name`, `units`"
        );
        assert_eq!(
            requote("duplicate key `low` in table `a`b`"),
            "duplicate key `low` in table `a'b`"
        );
        assert_eq!(
            requote("invalid type: integer `5`"),
            "invalid type: integer `5`"
        );
    }

    #[test]
    fn line_and_column_are_one_based() {
        assert_eq!(line_and_column("ab\ncd", 0), (1, 1));
        assert_eq!(line_and_column("ab\ncd", 4), (2, 2));
    }
}
