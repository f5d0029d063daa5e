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
            let (shown, caret) = excerpt(src, self.column.saturating_sub(1));
            write!(f, "\n {gutter} | {shown}")?;
            let pad: String = shown.chars().take(caret).map(|c| if c == '\t' { '\t' } else { ' ' }).collect();
            write!(f, "\n {} | {}^", " ".repeat(gutter.len()), pad)?;
        }
        if let Some(h) = &self.hint {
            write!(f, "\n  hint: {h}")?;
        }
        Ok(())
    }
}

impl std::error::Error for ScenarioError {}

/// Longest source line shown whole in an error; a longer one is cut around the column.
const EXCERPT_CHARS: usize = 120;

/// The part of `line` to show and the caret's position in it (in characters).
fn excerpt(line: &str, column: usize) -> (String, usize) {
    let count = line.chars().count();
    if count <= EXCERPT_CHARS {
        return (line.to_owned(), column);
    }
    let half = EXCERPT_CHARS / 2;
    let start = column.saturating_sub(half).min(count.saturating_sub(EXCERPT_CHARS));
    let end = (start + EXCERPT_CHARS).min(count);
    let mut shown: String = line.chars().skip(start).take(end - start).collect();
    let mut caret = column - start;
    if start > 0 {
        shown.insert(0, '…');
        caret += 1;
    }
    if end < count {
        shown.push('…');
    }
    (shown, caret)
}

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
    fn long_lines_are_cut_around_the_column() {
        let src = format!("name = \"{}\" x\n", "y".repeat(100_000));
        let e = ScenarioError::at("s.toml", &src, 100_010, "name", "oops");
        let text = e.to_string();
        assert!(text.len() < 600, "{} bytes", text.len());
        let lines: Vec<&str> = text.lines().collect();
        let caret = lines[2].find('^').unwrap();
        assert_eq!(lines[1].chars().nth(caret), Some('x'), "{text}");
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
