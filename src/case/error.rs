//! The one error type of case files, with the file position, the dotted key,
//! and what was expected against what was found.

use std::fmt;
use std::ops::Range;

/// What went wrong, coarsely. The command line treats every kind as bad
/// input (exit 1), an unreadable case file included: it is the input that
/// is wrong, not the result folder.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum CaseErrorKind {
    /// The case file itself could not be read.
    Io,
    /// Not valid TOML.
    Syntax,
    /// A key that is not valid at its place.
    UnknownKey,
    /// A value of the wrong TOML type.
    WrongType,
    /// A required key is absent.
    Missing,
    /// A value of the right type but outside its allowed range, or an
    /// inconsistent combination of keys.
    Invalid,
    /// A file named by the case (Hamiltonian blocks) is missing, unreadable
    /// or malformed.
    File,
}

/// An error in a case file.
///
/// Display: `FILE:LINE:COL: key `dotted.key`: expected …, found …` followed
/// by `; did you mean `…`?` when a close match exists. The position is left
/// out when it is unknown (for example after [`super::Case::with`], whose
/// values have no place in the file).
#[derive(Clone, Debug, PartialEq)]
pub struct CaseError {
    /// The case file (or the origin given to [`super::Case::parse`]).
    pub origin: String,
    /// 1-based line and column (in characters) of the offending text.
    pub location: Option<(u32, u32)>,
    /// The dotted key path, e.g. `leads.left.temperature_k`.
    pub key: Option<String>,
    /// What was expected and what was found.
    pub message: String,
    /// A close match for a misspelt key or value.
    pub suggestion: Option<String>,
    /// Coarse class of the error.
    pub kind: CaseErrorKind,
}

impl fmt::Display for CaseError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.origin)?;
        if let Some((line, col)) = self.location {
            write!(f, ":{line}:{col}")?;
        }
        write!(f, ": ")?;
        if let Some(key) = &self.key {
            write!(f, "key `{key}`: ")?;
        }
        write!(f, "{}", self.message)?;
        if let Some(s) = &self.suggestion {
            write!(f, "; did you mean `{s}`?")?;
        }
        Ok(())
    }
}

impl std::error::Error for CaseError {}

/// Builds errors that carry the origin and convert byte spans to positions.
#[derive(Clone, Copy)]
pub(crate) struct ErrorContext<'a> {
    pub origin: &'a str,
    /// The source text when spans refer to it; `None` for generated text.
    pub text: Option<&'a str>,
}

impl ErrorContext<'_> {
    pub fn error(
        &self,
        kind: CaseErrorKind,
        span: Option<Range<usize>>,
        key: Option<&str>,
        message: impl Into<String>,
    ) -> CaseError {
        let location = match (self.text, span) {
            (Some(text), Some(span)) => {
                let (l, c) = line_column(text, span.start);
                Some((
                    u32::try_from(l).unwrap_or(u32::MAX),
                    u32::try_from(c).unwrap_or(u32::MAX),
                ))
            }
            _ => None,
        };
        CaseError {
            origin: self.origin.to_string(),
            location,
            key: key.map(str::to_string),
            message: message.into(),
            suggestion: None,
            kind,
        }
    }

    /// "expected …, found …" at a value.
    pub fn invalid(
        &self,
        span: Option<Range<usize>>,
        key: &str,
        expected: &str,
        found: impl fmt::Display,
    ) -> CaseError {
        self.error(
            CaseErrorKind::Invalid,
            span,
            Some(key),
            format!("expected {expected}, found {found}"),
        )
    }

    /// A required key is absent; `span` is the table that should hold it.
    pub fn missing(&self, span: Option<Range<usize>>, key: &str, expected: &str) -> CaseError {
        self.error(
            CaseErrorKind::Missing,
            span,
            Some(key),
            format!("expected {expected}, found nothing (the key is missing)"),
        )
    }
}

impl CaseError {
    /// Attach a close match.
    pub(crate) fn with_suggestion(mut self, suggestion: Option<String>) -> Self {
        self.suggestion = suggestion;
        self
    }
}

/// 1-based line and column (in characters) of a byte offset.
pub fn line_column(text: &str, offset: usize) -> (usize, usize) {
    let offset = offset.min(text.len());
    // Step back to a character boundary so slicing never panics.
    let mut cut = offset;
    while !text.is_char_boundary(cut) {
        cut -= 1;
    }
    let before = &text[..cut];
    let line = before.matches('\n').count() + 1;
    let line_start = before.rfind('\n').map_or(0, |p| p + 1);
    let column = before[line_start..].chars().count() + 1;
    (line, column)
}

/// Levenshtein distance between two strings (in characters).
pub fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    let mut cur = vec![0; b.len() + 1];
    for (i, ca) in a.chars().enumerate() {
        cur[0] = i + 1;
        for (j, &cb) in b.iter().enumerate() {
            let sub = prev[j] + usize::from(ca != cb);
            cur[j + 1] = sub.min(prev[j + 1] + 1).min(cur[j] + 1);
        }
        std::mem::swap(&mut prev, &mut cur);
    }
    prev[b.len()]
}

/// The candidates closest to `word`, best first: those within an edit
/// distance of about a third of the word's length (at least 2), or that
/// contain it or are contained in it.
pub fn close_matches<'c>(word: &str, candidates: impl IntoIterator<Item = &'c str>) -> Vec<String> {
    let limit = (word.chars().count() / 3).max(2);
    let lower = word.to_lowercase();
    let mut scored: Vec<(usize, String)> = candidates
        .into_iter()
        .filter_map(|c| {
            let d = edit_distance(&lower, &c.to_lowercase());
            let contains = !lower.is_empty()
                && lower.len() >= 3
                && (c.contains(lower.as_str()) || lower.contains(c));
            (d <= limit || contains).then(|| (d, c.to_string()))
        })
        .collect();
    scored.sort();
    scored.dedup_by(|a, b| a.1 == b.1);
    scored.into_iter().map(|(_, c)| c).collect()
}

/// The single best close match, if any.
pub fn closest<'c>(word: &str, candidates: impl IntoIterator<Item = &'c str>) -> Option<String> {
    close_matches(word, candidates).into_iter().next()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn positions_count_lines_and_characters() {
        let t = "a = 1\nµ = 2\n";
        assert_eq!(line_column(t, 0), (1, 1));
        assert_eq!(line_column(t, 6), (2, 1));
        // 'µ' takes bytes 6-7 and the space byte 8, so byte 9 is '=', the
        // third character of line 2.
        assert_eq!(line_column(t, 9), (2, 3));
        assert_eq!(line_column(t, 1000), (3, 1));
    }

    #[test]
    fn edit_distance_examples() {
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("", "abc"), 3);
        assert_eq!(edit_distance("voltge_v", "voltage_v"), 1);
        assert_eq!(
            closest("temprature_k", ["temperature_k", "fermi_level_ev"]),
            Some("temperature_k".into())
        );
        assert_eq!(closest("zzz", ["temperature_k"]), None);
    }
}
