//! Inputs: parse sites (TOML) and targets (CSV) text into typed, validated values.
//!
//! Parse first, then resolve: the functions here take the text and a label for messages (normally the
//! path); reading files is the binary's job. Every problem found in a file is collected (up to
//! [`MAX_PROBLEMS`]) and reported together, each naming line, field, what was found and what was expected.

pub mod angles;
pub mod observed;
pub mod project;
pub mod sites;
pub mod targets;
pub mod units;

use std::fmt;

/// At most this many problems are listed for one file; the rest are counted.
pub const MAX_PROBLEMS: usize = 50;

/// One thing wrong in an input file.
#[derive(Debug, Clone, PartialEq)]
pub struct Problem {
    /// 1-based line number, when known.
    pub line: Option<usize>,
    /// The field (column or key) concerned, when known.
    pub field: Option<String>,
    /// What was found and what was expected.
    pub message: String,
}

/// All problems found in one input file.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub struct InputError {
    /// The file's label as given by the caller (normally its path).
    pub file: String,
    /// The problems, in file order.
    pub problems: Vec<Problem>,
    /// Problems beyond [`MAX_PROBLEMS`] that were not listed.
    pub more: usize,
}

impl InputError {
    /// An error with a single problem.
    pub fn single(
        file: &str,
        line: Option<usize>,
        field: Option<&str>,
        message: String,
    ) -> InputError {
        InputError {
            file: file.to_string(),
            problems: vec![Problem {
                line,
                field: field.map(str::to_string),
                message,
            }],
            more: 0,
        }
    }
}

impl fmt::Display for InputError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (i, p) in self.problems.iter().enumerate() {
            if i > 0 {
                writeln!(f)?;
            }
            write!(f, "{}", self.file)?;
            if let Some(line) = p.line {
                write!(f, ":{line}")?;
            }
            write!(f, ": ")?;
            if let Some(field) = &p.field {
                write!(f, "{field}: ")?;
            }
            write!(f, "{}", p.message)?;
        }
        if self.more > 0 {
            write!(f, "\n{}: {} more problems not shown", self.file, self.more)?;
        }
        Ok(())
    }
}

/// Collects problems for one file.
#[derive(Debug, Default)]
pub(crate) struct Problems {
    list: Vec<Problem>,
    more: usize,
}

impl Problems {
    pub(crate) fn push(&mut self, line: Option<usize>, field: &str, message: String) {
        if self.list.len() < MAX_PROBLEMS {
            self.list.push(Problem {
                line,
                field: (!field.is_empty()).then(|| field.to_string()),
                message,
            });
        } else {
            self.more += 1;
        }
    }

    pub(crate) fn list_is_empty(&self) -> bool {
        self.list.is_empty()
    }

    pub(crate) fn into_result<T>(self, file: &str, value: T) -> Result<T, InputError> {
        if self.list.is_empty() {
            Ok(value)
        } else {
            Err(InputError {
                file: file.to_string(),
                problems: self.list,
                more: self.more,
            })
        }
    }
}

/// Parse a finite number, with a message naming what was found.
pub(crate) fn parse_finite(text: &str, expected: &str) -> Result<f64, String> {
    let t = text.trim();
    match t.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(_) => Err(format!(
            "found {t:?}, expected {expected} (a finite number)"
        )),
        Err(_) => Err(format!("found {t:?}, expected {expected}")),
    }
}

/// A CSV input opened for reading: the reader positioned after the header, the header names trimmed and
/// lower-cased, and the header's line number.
pub(crate) struct CsvInput<'t> {
    pub(crate) reader: csv::Reader<&'t [u8]>,
    pub(crate) headers: Vec<String>,
    pub(crate) header_line: usize,
}

/// Open CSV text the way every dipwatch CSV input is read: a UTF-8 byte-order mark dropped, `#` comment lines,
/// the delimiter detected from the header (comma, semicolon or tab), rows of any length. An empty file is an
/// error saying `empty_expected`.
pub(crate) fn open_csv<'t>(
    file: &str,
    text: &'t str,
    empty_expected: &str,
) -> Result<CsvInput<'t>, InputError> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let is_blank = |l: &str| l.trim().is_empty() || l.trim_start().starts_with('#');
    let Some(header_index) = text.lines().position(|l| !is_blank(l)) else {
        return Err(InputError::single(
            file,
            None,
            None,
            format!("the file is empty; expected {empty_expected}"),
        ));
    };
    let mut reader = csv::ReaderBuilder::new()
        .delimiter(targets::detect_delimiter(text))
        .comment(Some(b'#'))
        .flexible(true)
        .from_reader(text.as_bytes());
    let headers = match reader.headers() {
        Ok(h) => h.iter().map(|x| x.trim().to_lowercase()).collect(),
        Err(e) => {
            return Err(InputError::single(
                file,
                Some(header_index + 1),
                None,
                format!("unreadable header: {e}"),
            ))
        }
    };
    Ok(CsvInput {
        reader,
        headers,
        header_line: header_index + 1,
    })
}
