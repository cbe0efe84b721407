//! Errors about user input: every one names the file, the line when known,
//! and what was expected.

use std::fmt;
use std::path::{Path, PathBuf};

/// A complaint about a user-supplied file (problem TOML, regressor log CSV,
/// plan JSON). The command-line tool maps it to exit code 2.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub struct InputError {
    /// The file at fault.
    pub file: PathBuf,
    /// 1-based line number in that file, when it is known.
    pub line: Option<usize>,
    /// What is wrong and what was expected.
    pub message: String,
}

impl InputError {
    /// An error located at a line of `file`.
    pub fn at(file: &Path, line: usize, message: impl Into<String>) -> Self {
        InputError {
            file: file.to_path_buf(),
            line: Some(line),
            message: message.into(),
        }
    }

    /// An error about `file` as a whole (missing file, empty log, ...).
    pub fn whole(file: &Path, message: impl Into<String>) -> Self {
        InputError {
            file: file.to_path_buf(),
            line: None,
            message: message.into(),
        }
    }
}

impl fmt::Display for InputError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.line {
            Some(line) => write!(f, "{}:{}: {}", self.file.display(), line, self.message),
            None => write!(f, "{}: {}", self.file.display(), self.message),
        }
    }
}

/// 1-based line number of byte offset `offset` in `text`.
pub fn line_of(text: &str, offset: usize) -> usize {
    let end = offset.min(text.len());
    text.as_bytes()[..end]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
        + 1
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn line_numbers_are_one_based() {
        let text = "a\nbc\nd";
        assert_eq!(line_of(text, 0), 1);
        assert_eq!(line_of(text, 2), 2);
        assert_eq!(line_of(text, 5), 3);
        assert_eq!(line_of(text, 99), 3);
    }

    #[test]
    fn display_names_file_and_line() {
        let e = InputError::at(Path::new("p.toml"), 4, "expected a number");
        assert_eq!(e.to_string(), "p.toml:4: expected a number");
    }
}
