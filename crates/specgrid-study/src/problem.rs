//! Problems found in a study file, each tied to a file position so the user can fix it.

use std::fmt;
use std::path::{Path, PathBuf};

/// One problem in a study file: where it is, what is wrong, and what to do.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct StudyProblem {
    /// The study file.
    pub path: PathBuf,
    /// 1-based line; 0 when the problem concerns the whole file (e.g. it cannot be read).
    pub line: usize,
    /// 1-based column in characters; 0 when `line` is 0.
    pub column: usize,
    /// What is wrong.
    pub message: String,
    /// What to do about it, if there is a clear suggestion.
    pub hint: Option<String>,
}

impl fmt::Display for StudyProblem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.path.display())?;
        if self.line > 0 {
            write!(f, ":{}:{}", self.line, self.column)?;
        }
        write!(f, ": {}", self.message)?;
        if let Some(hint) = &self.hint {
            write!(f, "; {hint}")?;
        }
        Ok(())
    }
}

impl std::error::Error for StudyProblem {}

/// The text of a study file, kept to turn byte offsets into line and column numbers.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct Source {
    pub path: PathBuf,
    /// Byte offset of the start of each line.
    line_starts: Vec<usize>,
    text: String,
}

impl Source {
    pub fn new(path: &Path, text: String) -> Self {
        let mut line_starts = vec![0];
        line_starts.extend(text.match_indices('\n').map(|(i, _)| i + 1));
        Source {
            path: path.to_path_buf(),
            line_starts,
            text,
        }
    }

    pub fn text(&self) -> &str {
        &self.text
    }

    /// 1-based line and character column of a byte offset (clamped to the text).
    pub fn position(&self, offset: usize) -> (usize, usize) {
        let offset = offset.min(self.text.len());
        let line_index = match self.line_starts.binary_search(&offset) {
            Ok(i) => i,
            Err(i) => i - 1,
        };
        let start = self.line_starts[line_index];
        // Offsets from the parser sit on char boundaries; be safe if one does not.
        let column = self
            .text
            .get(start..offset)
            .map(|s| s.chars().count())
            .unwrap_or(offset - start);
        (line_index + 1, column + 1)
    }

    /// A problem at a byte offset.
    pub fn problem(
        &self,
        offset: usize,
        message: impl Into<String>,
        hint: Option<String>,
    ) -> StudyProblem {
        let (line, column) = self.position(offset);
        StudyProblem {
            path: self.path.clone(),
            line,
            column,
            message: message.into(),
            hint,
        }
    }
}

/// A problem about the whole file, with no position.
pub(crate) fn file_problem(
    path: &Path,
    message: impl Into<String>,
    hint: Option<String>,
) -> StudyProblem {
    StudyProblem {
        path: path.to_path_buf(),
        line: 0,
        column: 0,
        message: message.into(),
        hint,
    }
}

/// The closest allowed word to a misspelt one, if it is close enough to be a likely typo:
/// at most two edits away (for words of three letters or more) or a high Jaro–Winkler score.
pub(crate) fn closest<'a>(word: &str, allowed: &[&'a str]) -> Option<&'a str> {
    allowed
        .iter()
        .map(|c| {
            (
                strsim::levenshtein(word, c),
                strsim::jaro_winkler(word, c),
                *c,
            )
        })
        .filter(|(edits, score, _)| (*edits <= 2 && word.chars().count() >= 3) || *score >= 0.85)
        .min_by(|a, b| a.0.cmp(&b.0).then(b.1.total_cmp(&a.1)))
        .map(|(_, _, c)| c)
}

/// "did you mean `x`?" or a list of the allowed words.
pub(crate) fn suggestion(word: &str, allowed: &[&str]) -> String {
    match closest(word, allowed) {
        Some(c) => format!("did you mean `{c}`?"),
        None => format!("allowed here: {}", quoted_list(allowed)),
    }
}

/// `a`, `b`, `c`
pub(crate) fn quoted_list(words: &[&str]) -> String {
    words
        .iter()
        .map(|w| format!("`{w}`"))
        .collect::<Vec<_>>()
        .join(", ")
}
