//! The project file (`--project project.toml`): the title block of a report that goes into a
//! permit package: who the work is for, where, under what reference, and who prepared and
//! checked it. Its keys are documented in docs/project-format.md.

use std::path::Path;

use serde::Deserialize;
use toml::Spanned;

use super::diagnostic::Diagnostics;
use super::toml_input::{read_toml, span_location};

/// Longest single-line entry, in characters: a title block is a few lines on a page.
const MAX_FIELD_CHARS: usize = 200;
/// Longest free note, in characters.
const MAX_NOTE_CHARS: usize = 2000;
/// Most free notes.
const MAX_NOTES: usize = 20;

/// The title block of a report (all text as given, checked for length and control characters).
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Project {
    pub name: String,
    pub site: Option<String>,
    pub applicant: Option<String>,
    /// Permit or other reference number.
    pub reference: Option<String>,
    pub prepared_by: Option<String>,
    pub checked_by: Option<String>,
    pub revision: Option<String>,
    pub notes: Vec<String>,
    /// The file it was read from, as given.
    pub file: String,
}

impl Project {
    /// The title block's rows, (label, value), in the order they are printed; absent entries
    /// are left out.
    pub fn rows(&self) -> Vec<(&'static str, String)> {
        let mut rows = vec![("Project", self.name.clone())];
        let optional = [
            ("Site", &self.site),
            ("Applicant", &self.applicant),
            ("Reference / permit no.", &self.reference),
            ("Prepared by", &self.prepared_by),
            ("Checked by", &self.checked_by),
            ("Revision", &self.revision),
        ];
        for (label, value) in optional {
            if let Some(v) = value {
                rows.push((label, v.clone()));
            }
        }
        rows
    }
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct ProjectFile {
    name: Spanned<String>,
    site: Option<Spanned<String>>,
    applicant: Option<Spanned<String>>,
    reference: Option<Spanned<String>>,
    prepared_by: Option<Spanned<String>>,
    checked_by: Option<Spanned<String>>,
    revision: Option<Spanned<String>>,
    #[serde(default)]
    notes: Vec<Spanned<String>>,
}

const FIX: &str = "see docs/project-format.md: keys name (required), site, applicant, reference, prepared_by, checked_by, revision (text) and notes (a list of texts)";

/// Reads a project file; every problem is a diagnostic with the file, line and column.
pub fn load_project(path: &Path) -> Result<Project, Diagnostics> {
    let file = path.display().to_string();
    let mut diags = Diagnostics::new();
    let Some((p, text)) = read_toml::<ProjectFile>(path, &file, FIX, &mut diags) else {
        return Err(diags);
    };
    let check = |key: &str, value: &Spanned<String>, limit: usize, diags: &mut Diagnostics| {
        let v = value.get_ref().trim();
        // The short entries are single lines of a title block; notes may hold line breaks.
        if let Some(problem) = text_problem(v, limit, limit == MAX_FIELD_CHARS) {
            diags.error(
                span_location(&file, &text, value.span()),
                format!("{key}: {problem}"),
                format!("give {key} as plain text of at most {limit} characters"),
            );
        }
        v.to_string()
    };
    let optional = |key: &str, value: &Option<Spanned<String>>, diags: &mut Diagnostics| {
        value
            .as_ref()
            .map(|v| check(key, v, MAX_FIELD_CHARS, diags))
            .filter(|v| !v.is_empty())
    };
    let d = &mut diags;
    let project = Project {
        name: check("name", &p.name, MAX_FIELD_CHARS, d),
        site: optional("site", &p.site, d),
        applicant: optional("applicant", &p.applicant, d),
        reference: optional("reference", &p.reference, d),
        prepared_by: optional("prepared_by", &p.prepared_by, d),
        checked_by: optional("checked_by", &p.checked_by, d),
        revision: optional("revision", &p.revision, d),
        notes: p
            .notes
            .iter()
            .map(|n| check("a note", n, MAX_NOTE_CHARS, d))
            .filter(|n| !n.is_empty())
            .collect(),
        file: file.clone(),
    };
    if project.name.is_empty() {
        diags.error(
            span_location(&file, &text, p.name.span()),
            "name is empty",
            "give the project's name, e.g. name = \"Willow Street apartments\"",
        );
    }
    if p.notes.len() > MAX_NOTES {
        diags.error(
            span_location(&file, &text, p.notes[MAX_NOTES].span()),
            format!("{} notes; at most {MAX_NOTES} are printed", p.notes.len()),
            "join related notes into one",
        );
    }
    if diags.has_errors() {
        return Err(diags);
    }
    Ok(project)
}

/// What is wrong with a text entry, if anything: too long, or a control character (which
/// would break a table row or hide text in a printed report).
fn text_problem(v: &str, limit: usize, one_line: bool) -> Option<String> {
    let chars = v.chars().count();
    if chars > limit {
        return Some(format!("{chars} characters, more than {limit}"));
    }
    let bad = v
        .chars()
        .find(|&c| c.is_control() && (one_line || c != '\n'));
    bad.map(|c| format!("contains the control character U+{:04X}", c as u32))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn load_text(text: &str) -> Result<Project, Diagnostics> {
        let dir = tempfile::tempdir().expect("temp dir");
        let path = dir.path().join("project.toml");
        std::fs::write(&path, text).expect("write");
        load_project(&path)
    }

    // Behaviour checks of our own file format: common practice, no source.
    #[test]
    fn reads_every_key_and_keeps_the_order_of_the_title_block() {
        let p = load_text(
            "name = \"Lot 7\"\nsite = \"1 Elm St\"\nreference = \"BP-1\"\nchecked_by = \"B\"\nnotes = [\"n1\", \"\"]\n",
        )
        .expect("valid");
        assert_eq!(p.name, "Lot 7");
        let labels: Vec<_> = p.rows().iter().map(|r| r.0).collect();
        assert_eq!(
            labels,
            ["Project", "Site", "Reference / permit no.", "Checked by"]
        );
        assert_eq!(p.notes, ["n1"]);
    }

    #[test]
    fn an_unknown_key_is_located_and_named() {
        let e = load_text("name = \"x\"\npermit = \"BP-1\"\n").expect_err("unknown key");
        let text = e.to_string();
        assert!(text.contains("project.toml:2:1"), "{text}");
        assert!(text.contains("permit"), "{text}");
    }

    #[test]
    fn a_missing_name_and_control_characters_are_errors() {
        assert!(load_text("site = \"x\"\n").is_err());
        let e = load_text("name = \"a\\u0007b\"\n").expect_err("bell");
        assert!(e.to_string().contains("U+0007"), "{e}");
        let long = format!("name = \"{}\"\n", "x".repeat(MAX_FIELD_CHARS + 1));
        assert!(load_text(&long).is_err());
    }
}
