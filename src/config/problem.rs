//! Configuration problems: what went wrong, in which file, at which line and column.
//!
//! Owns the `Problem`/`Problems` error types and the conversion from a byte span in a file's
//! text to a 1-based line and column. It knows nothing about which keys exist.

use std::fmt;
use std::ops::Range;
use std::path::{Path, PathBuf};

/// One configuration problem, located.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Problem {
    /// The file the problem is in.
    pub file: PathBuf,
    /// 1-based line of the offending key, value or table header.
    pub line: usize,
    /// 1-based column (in characters) on that line.
    pub column: usize,
    /// What was found and what was expected.
    pub message: String,
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{}:{}:{}: {}",
            self.file.display(),
            self.line,
            self.column,
            self.message
        )
    }
}

/// All the problems found in a configuration directory (never just the first).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Problems(pub Vec<Problem>);

impl fmt::Display for Problems {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (i, p) in self.0.iter().enumerate() {
            if i > 0 {
                f.write_str("\n")?;
            }
            write!(f, "{p}")?;
        }
        Ok(())
    }
}

impl std::error::Error for Problems {}

/// 1-based (line, column) of a byte offset in `text`; columns count characters, not bytes.
///
/// Counts from the start of `text`: for one-off use. A file with many lookups builds a
/// `LineIndex` once instead (linear overall, where this would be quadratic).
#[cfg(test)]
pub(crate) fn line_col(text: &str, offset: usize) -> (usize, usize) {
    LineIndex::new(text).line_col(text, offset)
}

/// Byte offsets of the start of every line of a text, for (line, column) lookups in
/// O(log lines + line length) each.
pub(crate) struct LineIndex {
    /// `starts[k]` is the byte offset where line k + 1 begins; `starts[0] == 0`.
    starts: Vec<usize>,
}

impl LineIndex {
    /// Index `text` (one pass).
    pub fn new(text: &str) -> Self {
        let mut starts = vec![0];
        starts.extend(
            text.bytes()
                .enumerate()
                .filter(|&(_, b)| b == b'\n')
                .map(|(i, _)| i + 1),
        );
        LineIndex { starts }
    }

    /// 1-based (line, column) of a byte offset in `text` (the text this index was built from);
    /// columns count characters, not bytes.
    pub fn line_col(&self, text: &str, offset: usize) -> (usize, usize) {
        let mut offset = offset.min(text.len());
        while !text.is_char_boundary(offset) {
            offset -= 1;
        }
        // The last line start at or before `offset` (starts[0] == 0, so there is one).
        let line = self.starts.partition_point(|&s| s <= offset);
        let line_start = self.starts[line - 1];
        let column = text[line_start..offset].chars().count() + 1;
        (line, column)
    }
}

/// The file being checked and the problem list every check writes into.
pub(crate) struct Cx<'a> {
    /// Path of the file (as shown in messages).
    pub file: &'a Path,
    /// The file's text, to turn spans into lines and columns.
    pub text: &'a str,
    /// Line starts of `text` (built once per file: every lookup is then a binary search).
    pub lines: &'a LineIndex,
    /// Where problems go (shared by all files of the directory).
    pub problems: &'a mut Vec<Problem>,
}

impl Cx<'_> {
    /// Record a problem at a span (start of the file when the span is unknown).
    pub fn at(&mut self, span: Option<Range<usize>>, message: impl Into<String>) {
        let (line, column) = self.pos(span);
        self.problems.push(Problem {
            file: self.file.to_path_buf(),
            line,
            column,
            message: message.into(),
        });
    }

    /// 1-based line and column of a span's start.
    pub fn pos(&self, span: Option<Range<usize>>) -> (usize, usize) {
        span.map_or((1, 1), |s| self.lines.line_col(self.text, s.start))
    }
}

impl Problem {
    /// A problem at a 1-based (line, column) of `file`.
    pub(crate) fn at(file: &Path, (line, column): (usize, usize), message: String) -> Problem {
        let file = file.to_path_buf();
        Problem {
            file,
            line,
            column,
            message,
        }
    }
}

/// A problem for a whole file (cannot be read, missing): located at line 1, column 1.
pub(crate) fn whole_file(file: &Path, message: impl Into<String>) -> Problem {
    Problem::at(file, (1, 1), message.into())
}

/// Where each id (or other key that must be unique) was first written (`file:line`), with what
/// was recorded with it.
pub(crate) type FirstSeen<K, V = ()> = std::collections::BTreeMap<K, (String, V)>;

/// The first occurrence of `key` when it is seen again; otherwise `None`, and `key` recorded as
/// written at `file`, `pos`, with `v`.
pub(crate) fn again<'m, K: Ord, V>(
    seen: &'m mut FirstSeen<K, V>,
    key: K,
    (file, pos): (&Path, (usize, usize)),
    v: V,
) -> Option<&'m (String, V)> {
    match seen.entry(key) {
        std::collections::btree_map::Entry::Occupied(e) => Some(e.into_mut()),
        std::collections::btree_map::Entry::Vacant(e) => {
            e.insert((format!("{}:{}", file.display(), pos.0), v));
            None
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn line_col_counts_lines_and_characters() {
        let text = "a = 1\nbé = 2\n";
        assert_eq!(line_col(text, 0), (1, 1));
        assert_eq!(line_col(text, 6), (2, 1));
        // "bé = " is 6 bytes but 5 characters: the value starts at column 6.
        let value = text.find('2').unwrap_or(0);
        assert_eq!(line_col(text, value), (2, 6));
    }

    #[test]
    fn line_index_agrees_with_counting_from_the_start() {
        let text = "a = 1\n\nbé = \"ü\"\r\n[t]\nx = 2";
        let index = LineIndex::new(text);
        for offset in 0..=text.len() + 3 {
            let mut o = offset.min(text.len());
            while !text.is_char_boundary(o) {
                o -= 1;
            }
            let before = &text[..o];
            let line = before.matches('\n').count() + 1;
            let start = before.rfind('\n').map_or(0, |i| i + 1);
            let column = before[start..].chars().count() + 1;
            assert_eq!(
                index.line_col(text, offset),
                (line, column),
                "offset {offset}"
            );
        }
    }

    #[test]
    fn problems_display_one_line_each() {
        let p = Problems(vec![
            whole_file(Path::new("a.toml"), "first"),
            Problem {
                file: PathBuf::from("b.toml"),
                line: 3,
                column: 7,
                message: "second".into(),
            },
        ]);
        assert_eq!(p.to_string(), "a.toml:1:1: first\nb.toml:3:7: second");
    }
}
