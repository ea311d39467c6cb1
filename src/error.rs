//! Typed errors of the library.
//!
//! Every variant says what went wrong and what the user can do about it.
//! The binary maps [`Error::exit_code`] to the process exit status: 2 for
//! usage and input problems, 1 for everything else.

use std::fmt;

/// One problem found in one cell of an input file.
#[derive(Debug, Clone, PartialEq)]
pub struct CellProblem {
    /// Line number in the file (1-based; the header is line 1).
    pub line: u64,
    /// Column header as written in the file.
    pub column: String,
    /// The cell's text (shortened when long).
    pub value: String,
    /// What is wrong and how to fix it.
    pub message: String,
    /// Where the cell is when not on a CSV line: `cell extraction!D14` in
    /// a spreadsheet, `row 14` in a Parquet file; None for CSV.
    pub cell: Option<String>,
}

impl fmt::Display for CellProblem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match &self.cell {
            Some(place) => write!(
                f,
                "{place}, column '{}' (value '{}'): {}",
                self.column, self.value, self.message
            ),
            None => write!(
                f,
                "line {}, column '{}' (value '{}'): {}",
                self.line, self.column, self.value, self.message
            ),
        }
    }
}

/// A list of cell problems, displayed one per line.
#[derive(Debug, Clone, PartialEq)]
pub struct CellProblems {
    /// Name of the file the problems were found in.
    pub source: String,
    /// The problems, in file order (at most [`CellProblems::MAX_LISTED`] kept).
    pub problems: Vec<CellProblem>,
    /// How many problems there were in all.
    pub total: usize,
}

impl CellProblems {
    /// How many problems are kept for display.
    pub const MAX_LISTED: usize = 20;

    /// Nothing when `total` is 0; else [`Error::Cells`] for `source` with
    /// the first [`CellProblems::MAX_LISTED`] of `problems` (in file order)
    /// and the count of all of them.
    ///
    /// # Errors
    /// [`Error::Cells`] when `total` > 0.
    pub fn check(source: &str, mut problems: Vec<CellProblem>, total: usize) -> Result<()> {
        if total == 0 {
            return Ok(());
        }
        problems.truncate(Self::MAX_LISTED);
        Err(Error::Cells(CellProblems {
            source: source.to_string(),
            problems,
            total,
        }))
    }
}

impl fmt::Display for CellProblems {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let noun = if self.total == 1 {
            "problem"
        } else {
            "problems"
        };
        write!(f, "{}: {} {} in the data", self.source, self.total, noun)?;
        for p in &self.problems {
            write!(f, "\n  {p}")?;
        }
        if self.total > self.problems.len() {
            write!(f, "\n  ... and {} more", self.total - self.problems.len())?;
        }
        write!(
            f,
            "\nFix these cells (or leave a cell empty to exclude that study) and run again."
        )
    }
}

/// Errors returned by the library.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// A file could not be read or written.
    #[error("{path}: {action} failed")]
    Io {
        /// The path involved.
        path: String,
        /// What was attempted ("reading", "writing", ...).
        action: &'static str,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },
    /// The file is not a CSV table we can read (empty, no header, bad encoding, ragged rows).
    #[error("{source_name}: {message}")]
    Format {
        /// Name of the file.
        source_name: String,
        /// What is wrong, with line numbers where known.
        message: String,
    },
    /// A column the analysis needs is not in the header.
    #[error("{source_name}: no column '{column}' (needed for {purpose}). Columns in the file: {available}. {hint}")]
    MissingColumn {
        /// Name of the file.
        source_name: String,
        /// The header that was looked for.
        column: String,
        /// Why it is needed.
        purpose: String,
        /// The headers present, comma-separated.
        available: String,
        /// How to fix it.
        hint: String,
    },
    /// Cells with values that cannot be used.
    #[error("{0}")]
    Cells(CellProblems),
    /// An option or a combination of options is not valid.
    #[error("{option}: {message}")]
    Usage {
        /// The option (for example `--at`).
        option: String,
        /// What is wrong and what to do.
        message: String,
    },
    /// The data cannot support the requested model (too few studies, a constant or collinear moderator, ...).
    #[error("{0}")]
    Model(String),
    /// A numerical procedure did not reach an answer; no number is reported.
    #[error("{what} did not converge: {detail}. No result is reported rather than an unreliable one; {hint}")]
    NoConvergence {
        /// The procedure.
        what: String,
        /// How it ended.
        detail: String,
        /// What the user can try.
        hint: String,
    },
}

impl Error {
    /// Exit status for the command-line tool: 2 for usage and input errors, 1 otherwise.
    pub fn exit_code(&self) -> u8 {
        match self {
            Error::Format { .. }
            | Error::MissingColumn { .. }
            | Error::Cells(_)
            | Error::Usage { .. }
            | Error::Model(_) => 2,
            Error::Io { action, .. } if *action == "reading" => 2,
            Error::Io { .. } | Error::NoConvergence { .. } => 1,
        }
    }

    /// Shorthand for a usage error.
    pub fn usage(option: impl Into<String>, message: impl Into<String>) -> Self {
        Error::Usage {
            option: option.into(),
            message: message.into(),
        }
    }
}

/// Result type of the library.
pub type Result<T, E = Error> = std::result::Result<T, E>;
