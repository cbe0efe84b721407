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

/// 1-based line number of byte offset `offset` in `text` (one scan; for
/// many look-ups in one text build a [`LineIndex`]).
pub fn line_of(text: &str, offset: usize) -> usize {
    let end = offset.min(text.len());
    text.as_bytes()[..end]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
        + 1
}

/// The line starts of a text, for line look-ups in O(log lines) each
/// (reading a file with many entries stays linear).
#[derive(Debug, Clone)]
pub struct LineIndex {
    /// Byte offset of the first byte after each newline.
    after_newline: Vec<usize>,
}

impl LineIndex {
    /// Indexes `text` in one scan.
    pub fn new(text: &str) -> Self {
        LineIndex {
            after_newline: text
                .bytes()
                .enumerate()
                .filter(|&(_, b)| b == b'\n')
                .map(|(k, _)| k + 1)
                .collect(),
        }
    }

    /// 1-based line number of byte offset `offset` (as [`line_of`]).
    pub fn line(&self, offset: usize) -> usize {
        self.after_newline.partition_point(|&s| s <= offset) + 1
    }
}

/// The text of a file's bytes: a leading UTF-8 byte-order mark is dropped
/// (as TOML and CSV readers commonly accept one); invalid UTF-8 is an
/// [`InputError`] at the line of the first bad byte.
///
/// # Errors
/// When the bytes are not UTF-8.
pub fn decode(path: &Path, mut bytes: Vec<u8>) -> Result<String, InputError> {
    if bytes.starts_with(&[0xEF, 0xBB, 0xBF]) {
        bytes.drain(..3);
    }
    String::from_utf8(bytes).map_err(|e| {
        let good = e.utf8_error().valid_up_to();
        let bytes = e.as_bytes();
        let line = bytes[..good].iter().filter(|&&b| b == b'\n').count() + 1;
        let column = good
            - bytes[..good]
                .iter()
                .rposition(|&b| b == b'\n')
                .map_or(0, |k| k + 1)
            + 1;
        InputError::at(
            path,
            line,
            format!(
                "byte 0x{:02X} at column {column} is not UTF-8; expected UTF-8 text",
                bytes[good]
            ),
        )
    })
}

/// Reads a file and [`decode`]s it; `what` names the file's role in the
/// message when it cannot be read.
///
/// # Errors
/// When the file cannot be read or is not UTF-8.
pub fn read_text(path: &Path, what: &str) -> Result<String, InputError> {
    let bytes = std::fs::read(path)
        .map_err(|e| InputError::whole(path, format!("cannot read the {what}: {e}")))?;
    decode(path, bytes)
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
    fn line_index_agrees_with_a_scan() {
        let text = "\nab\n\ncd\ne";
        let index = LineIndex::new(text);
        for offset in 0..text.len() + 3 {
            assert_eq!(index.line(offset), line_of(text, offset), "{offset}");
        }
    }

    #[test]
    fn decode_drops_a_bom_and_names_the_line_of_a_bad_byte() {
        let p = Path::new("a.csv");
        assert_eq!(decode(p, b"\xEF\xBB\xBFt,j\n".to_vec()).unwrap(), "t,j\n");
        let e = decode(p, b"t,j\n0,0\n1,\xFF\n".to_vec()).unwrap_err();
        assert_eq!(e.line, Some(3));
        assert!(e.message.contains("0xFF at column 3"), "{}", e.message);
    }

    #[test]
    fn display_names_file_and_line() {
        let e = InputError::at(Path::new("p.toml"), 4, "expected a number");
        assert_eq!(e.to_string(), "p.toml:4: expected a number");
    }
}

/// A reader's message in the words of the file format: the names of the
/// program's internal types and Rust number types that serde puts into its
/// messages ("expected struct RawNode", "expected f64") become what the
/// file should hold.
pub fn plain_words(message: &str) -> String {
    let mut out = message.to_string();
    // The plan reader's top-level struct also says how many fields it has.
    while let Some(i) = out.find("struct RawPlan with ") {
        let rest = &out[i + "struct RawPlan with ".len()..];
        let end = rest
            .find(" element")
            .map(|k| {
                let after = &rest[k + " element".len()..];
                k + " element".len() + usize::from(after.starts_with('s'))
            })
            .unwrap_or(0);
        out.replace_range(
            i..i + "struct RawPlan with ".len() + end,
            "a JSON object with a `links` list",
        );
    }
    for (from, to) in [
        (
            "struct RawPlanLink",
            "a link object {from, to, two_way} or a link id",
        ),
        ("struct RawPlan", "a JSON object with a `links` list"),
        ("struct RawProblem", "a problem file of TOML tables"),
        ("struct RawNetwork", "the table [network]"),
        ("struct RawEstimator", "the table [estimator]"),
        ("struct RawNode", "a [[node]] table"),
        ("struct RawLink", "a [[link]] table"),
        ("struct RawCandidates", "the table [candidates]"),
        ("expected f64", "expected a number"),
        ("expected f32", "expected a number"),
        ("expected usize", "expected a whole number"),
        ("expected u64", "expected a whole number"),
        ("expected u32", "expected a whole number"),
        ("expected i64", "expected a whole number"),
    ] {
        out = out.replace(from, to);
    }
    out
}

#[cfg(test)]
mod plain_tests {
    #[test]
    fn internal_names_become_file_words() {
        assert_eq!(
            super::plain_words("invalid type: integer `3`, expected struct RawNetwork"),
            "invalid type: integer `3`, expected the table [network]"
        );
        assert_eq!(
            super::plain_words(
                "invalid length 0, expected struct RawPlan with 5 elements at line 1"
            ),
            "invalid length 0, expected a JSON object with a `links` list at line 1"
        );
        assert_eq!(
            super::plain_words("invalid type: string \"a\", expected f64"),
            "invalid type: string \"a\", expected a number"
        );
    }
}
