//! Errors in scenario files: where (file:line:column and key path), what, and a hint.

use std::fmt;

/// A user mistake in a scenario, pointing at the place in the file.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ScenarioError {
    pub file: String,
    /// 1-based line and column; 0 when the error has no position (e.g. a missing file).
    pub line: usize,
    pub column: usize,
    /// Dotted key path, e.g. `line.length` or `node[2].transceiver.load`.
    pub key: String,
    pub message: String,
    pub hint: Option<String>,
    /// The offending source line, for the caret display.
    pub source_line: Option<String>,
}

impl ScenarioError {
    /// An error at byte `offset` of `source`.
    pub fn at(file: &str, source: &str, offset: usize, key: &str, message: impl Into<String>) -> Self {
        let (line, column) = line_col(source, offset);
        let source_line = source.lines().nth(line.saturating_sub(1)).map(str::to_owned);
        ScenarioError {
            file: file.to_owned(),
            line,
            column,
            key: key.to_owned(),
            message: message.into(),
            hint: None,
            source_line,
        }
    }

    /// An error about the file as a whole.
    pub fn whole_file(file: &str, message: impl Into<String>) -> Self {
        ScenarioError {
            file: file.to_owned(),
            line: 0,
            column: 0,
            key: String::new(),
            message: message.into(),
            hint: None,
            source_line: None,
        }
    }

    pub fn with_hint(mut self, hint: impl Into<String>) -> Self {
        self.hint = Some(hint.into());
        self
    }
}

impl fmt::Display for ScenarioError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.line > 0 {
            write!(f, "{}:{}:{}: ", self.file, self.line, self.column)?;
        } else {
            write!(f, "{}: ", self.file)?;
        }
        if !self.key.is_empty() {
            write!(f, "{}: ", self.key)?;
        }
        write!(f, "{}", self.message)?;
        if let Some(src) = &self.source_line {
            let gutter = self.line.to_string();
            write!(f, "\n {gutter} | {src}")?;
            let pad: String =
                src.chars().take(self.column.saturating_sub(1)).map(|c| if c == '\t' { '\t' } else { ' ' }).collect();
            write!(f, "\n {} | {}^", " ".repeat(gutter.len()), pad)?;
        }
        if let Some(h) = &self.hint {
            write!(f, "\n  hint: {h}")?;
        }
        Ok(())
    }
}

impl std::error::Error for ScenarioError {}

/// 1-based line and column (in characters) of a byte offset.
pub fn line_col(source: &str, offset: usize) -> (usize, usize) {
    let offset = offset.min(source.len());
    let before = &source[..floor_char_boundary(source, offset)];
    let line = before.matches('\n').count() + 1;
    let line_start = before.rfind('\n').map(|i| i + 1).unwrap_or(0);
    let column = before[line_start..].chars().count() + 1;
    (line, column)
}

fn floor_char_boundary(s: &str, mut i: usize) -> usize {
    while i > 0 && !s.is_char_boundary(i) {
        i -= 1;
    }
    i
}

/// The closest candidate to `word`, if one is close enough to be a likely typo.
pub fn did_you_mean<'a>(word: &str, candidates: impl IntoIterator<Item = &'a str>) -> Option<&'a str> {
    candidates
        .into_iter()
        .map(|c| (strsim::jaro_winkler(word, c), c))
        .filter(|(score, _)| *score >= 0.8)
        .max_by(|a, b| a.0.total_cmp(&b.0))
        .map(|(_, c)| c)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn positions_are_one_based() {
        let src = "a = 1\nbb = \"x\"\n";
        assert_eq!(line_col(src, 0), (1, 1));
        assert_eq!(line_col(src, 6), (2, 1));
        assert_eq!(line_col(src, 11), (2, 6));
    }

    #[test]
    fn hints_only_for_near_misses() {
        assert_eq!(did_you_mean("lenght", ["length", "impedance"]), Some("length"));
        assert_eq!(did_you_mean("zzz", ["length", "impedance"]), None);
    }

    #[test]
    fn display_has_place_key_and_caret() {
        let src = "[line]\nlength = \"-2 m\"\n";
        let e = ScenarioError::at("s.toml", src, 16, "line.length", "negative length");
        let text = e.to_string();
        assert!(text.starts_with("s.toml:2:10: line.length: negative length"), "{text}");
        assert!(text.contains("^"));
    }
}
