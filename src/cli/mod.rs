//! The command line: the top-level clap definition, the value types two
//! subcommands share, and the helpers every subcommand uses (the HTML report
//! target, the quoted command line, the progress bar). Each subcommand lives
//! in its own module with its flags, their check and its run function.

pub mod columns;
pub mod completions;
pub mod fit;
pub mod manual;
pub mod memory;
pub mod outputs;
pub mod plan;
pub mod schema;
pub mod sites;
pub mod sql;
pub mod style;
mod temps;

use clap::{Parser, Subcommand, ValueEnum};
use outputs::Target;
use pondus::error::{Error, Result};
use pondus::model::tau2::Tau2Method;
use pondus::model::Inference;

/// pondus: random-effects meta-analysis and meta-regression with moderators.
#[derive(Debug, Parser)]
#[command(name = "pondus", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
    /// Colour the terminal report: auto (on a terminal, unless NO_COLOR is set), always or never.
    #[arg(
        long = "color",
        value_enum,
        global = true,
        default_value_t,
        value_name = "WHEN"
    )]
    pub color: style::ColorChoice,
}

/// The subcommands.
// `fit` has many flags; the enum is built once per run, so its size does not matter.
#[allow(clippy::large_enum_variant)]
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Pool study effects and test whether study characteristics (moderators) change them.
    Fit(fit::FitArgs),
    /// Plan: the power of a moderator test before the data exist, and the sites needed.
    Plan(plan::PlanArgs),
    /// Per-site regressions from participant rows, streamed: the effects file for `fit`.
    Sites(sites::SitesArgs),
    /// Print SQL computing the per-site moments in a database (for `sites --moments`).
    Sql(sql::SqlArgs),
    /// List the columns each measure reads, route by route, with the sources of the formulas.
    Columns(columns::ColumnsArgs),
    /// Print a completion script for a shell (bash, zsh, fish, powershell, elvish).
    Completions(completions::CompletionsArgs),
    /// Print the roff manual of pondus or a subcommand; --out-dir writes them all.
    Manual(manual::ManualArgs),
    /// Print the JSON Schema (draft 2020-12) of the --json output of fit, sites or plan.
    Schema(schema::SchemaArgs),
}

/// Checks the flags of the parsed command and runs it.
///
/// # Errors
/// [`Error::Usage`] naming a flag and its fix, or any library error of the run.
pub fn run(cli: &Cli) -> Result<()> {
    temps::install();
    style::set(cli.color);
    match &cli.command {
        Command::Fit(args) => fit::run_fit(&args.check()?),
        Command::Plan(args) => plan::run_plan(&args.check()?),
        Command::Sites(args) => sites::run_sites(&args.check()?),
        Command::Sql(args) => sql::run_sql(args),
        Command::Columns(args) => columns::run_columns(args),
        Command::Completions(args) => completions::run_completions(args),
        Command::Manual(args) => manual::run_manual(args),
        Command::Schema(args) => schema::run_schema(args),
    }
}

/// τ² estimators as typed on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Tau2Arg {
    /// Restricted maximum likelihood (default).
    Reml,
    /// Maximum likelihood.
    Ml,
    /// DerSimonian–Laird (method of moments).
    Dl,
    /// Paule–Mandel.
    Pm,
    /// Hedges' OLS-based moments.
    He,
    /// Sidik–Jonkman.
    Sj,
    /// No between-study variance (common-effect model).
    None,
}

impl From<Tau2Arg> for Tau2Method {
    fn from(t: Tau2Arg) -> Self {
        match t {
            Tau2Arg::Reml => Tau2Method::Reml,
            Tau2Arg::Ml => Tau2Method::Ml,
            Tau2Arg::Dl => Tau2Method::Dl,
            Tau2Arg::Pm => Tau2Method::Pm,
            Tau2Arg::He => Tau2Method::He,
            Tau2Arg::Sj => Tau2Method::Sj,
            Tau2Arg::None => Tau2Method::None,
        }
    }
}

/// Test distributions as typed on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum InferenceArg {
    /// Knapp–Hartung t and F (default; holds its error rate better with few studies).
    Kh,
    /// Knapp–Hartung with its scale factor floored at 1: never narrower than z-based standard errors.
    KhFloor,
    /// Wald z and chi-square.
    Z,
}

impl From<InferenceArg> for Inference {
    fn from(i: InferenceArg) -> Self {
        match i {
            InferenceArg::Kh => Inference::Kh,
            InferenceArg::KhFloor => Inference::KhFloor,
            InferenceArg::Z => Inference::Z,
        }
    }
}

/// A `--decimal` value: `,` (or `comma`) or `.` (or `point`).
///
/// # Errors
/// A message listing the accepted values.
pub fn parse_decimal(s: &str) -> std::result::Result<pondus::input::number::DecimalMark, String> {
    use pondus::input::number::DecimalMark;
    match s.trim() {
        "," | "comma" => Ok(DecimalMark::Comma),
        "." | "point" => Ok(DecimalMark::Point),
        other => Err(format!(
            "'{other}' is not a decimal mark; give ',' (or comma) or '.' (or point)"
        )),
    }
}

/// A `--report` target: standard output or a path ending in `.html` or `.htm`.
fn report_target(flag: &str, path: &std::path::Path) -> Result<Target> {
    if path.as_os_str() == "-" {
        return Ok(Target::Stdout);
    }
    let ext = path
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase());
    match ext.as_deref() {
        Some("html") | Some("htm") => Ok(Target::from_arg(path)),
        _ => Err(Error::usage(
            flag,
            format!(
                "'{}': the report is an HTML page; give a file name ending in .html (or '-' for standard output)",
                path.display()
            ),
        )),
    }
}

/// This process's command line quoted for a POSIX shell, the program shown
/// as `pondus` (its path on this machine says nothing about the analysis).
pub fn invocation() -> String {
    let mut parts = vec!["pondus".to_string()];
    parts.extend(
        std::env::args_os()
            .skip(1)
            .map(|a| shell_quote(&a.to_string_lossy())),
    );
    parts.join(" ")
}

/// Quotes one word for a POSIX shell: unchanged when it is made of safe
/// characters only, otherwise in single quotes with `'` written as `'\''`.
pub fn shell_quote(word: &str) -> String {
    let safe = !word.is_empty()
        && word
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || "_-./=,:+@%".contains(c));
    if safe {
        word.to_string()
    } else {
        format!("'{}'", word.replace('\'', "'\\''"))
    }
}

/// Runs `work` with a progress callback. When `len` is given and standard
/// error is a terminal, the callback advances a bar of `len` steps drawn
/// with `template` (an indicatif template), cleared when `work` returns;
/// otherwise the callback does nothing.
pub fn with_progress<T>(
    len: Option<u64>,
    template: &str,
    work: impl FnOnce(&(dyn Fn(u64) + Sync)) -> T,
) -> T {
    use std::io::IsTerminal;
    let bar = match len {
        Some(n) if std::io::stderr().is_terminal() => {
            let bar = indicatif::ProgressBar::new(n);
            bar.set_style(
                indicatif::ProgressStyle::with_template(template)
                    .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
            );
            Some(bar)
        }
        _ => None,
    };
    let tick = |n: u64| {
        if let Some(b) = &bar {
            b.inc(n);
        }
    };
    let out = work(&tick);
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    out
}

/// A result as the bytes of its `--json` output.
///
/// # Errors
/// [`Error::Io`] (rendering) when serde cannot represent the value.
fn json_bytes<T: serde::Serialize>(value: &T) -> Result<Vec<u8>> {
    pondus::render::json::to_bytes(value).map_err(|e| io_err("JSON", std::io::Error::other(e)))
}

/// Writes any result as [`json_bytes`] renders it (pretty-printed JSON and
/// a newline, the same bytes) straight into `w`, for
/// [`outputs::Outputs::add_streamed`]. An error of serde itself (not of
/// the writer) is marked as a rendering failure.
///
/// # Errors
/// The writer's error, or the wrapped serde error.
fn stream_json<T: serde::Serialize>(value: &T, w: &mut outputs::Sink<'_>) -> std::io::Result<()> {
    use std::io::Write;
    serde_json::to_writer_pretty(&mut *w, value).map_err(|e| {
        if e.is_io() {
            std::io::Error::from(e)
        } else {
            outputs::RenderFailure::wrap("JSON", std::io::Error::other(e))
        }
    })?;
    w.write_all(b"\n")
}

/// An error of rendering an output in memory.
fn io_err(what: &str, source: std::io::Error) -> Error {
    Error::Io {
        path: format!("<{what} output>"),
        action: "rendering",
        source,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn clap_definition_is_consistent() {
        Cli::command().debug_assert();
    }

    /// Every [`Flag`] the library names in its messages is a long flag of
    /// exactly the subcommands it lists, and every long flag of a subcommand
    /// is a [`Flag`] listing that subcommand.
    #[test]
    fn library_flag_names_match_the_clap_definitions() {
        use pondus::support::flag::Flag;
        use std::collections::BTreeSet;
        let mut defined = BTreeSet::new();
        for sub in Cli::command().get_subcommands() {
            for arg in sub.get_arguments() {
                match arg.get_long() {
                    Some("help") | Some("version") | None => {}
                    Some(long) => {
                        defined.insert((sub.get_name().to_string(), format!("--{long}")));
                    }
                }
            }
        }
        let named: BTreeSet<(String, String)> = Flag::ALL
            .iter()
            .flat_map(|f| {
                f.commands()
                    .iter()
                    .map(move |c| (c.to_string(), f.name().to_string()))
            })
            .collect();
        let unknown: Vec<_> = named.difference(&defined).collect();
        let missing: Vec<_> = defined.difference(&named).collect();
        assert!(
            unknown.is_empty() && missing.is_empty(),
            "named in Flag but not defined: {unknown:?}; defined but not in Flag: {missing:?}"
        );
        assert!(defined.contains(&("fit".to_string(), "--probe".to_string())));
    }

    #[test]
    fn shell_quote_leaves_safe_words_and_quotes_the_rest() {
        assert_eq!(shell_quote("--moderator"), "--moderator");
        assert_eq!(shell_quote("a b"), "'a b'");
        assert_eq!(shell_quote("it's"), "'it'\\''s'");
        assert_eq!(shell_quote(""), "''");
    }
}
