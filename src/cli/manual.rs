//! `pondus manual [COMMAND]`: manual pages in roff, generated from the clap
//! definition of [`super::Cli`]: `pondus.1` for the top command and
//! `pondus-fit.1`, `pondus-plan.1`, … for the subcommands. They print to
//! standard output, or with `--out-dir` go into an existing directory
//! through [`Outputs`] (all pages or none, each written atomically, only
//! ever as regular files).

use super::outputs::{Outputs, Target};
use super::{io_err, Cli};
use clap::{Args, CommandFactory, ValueEnum};
use pondus::error::{Error, Result};
use std::path::PathBuf;

/// The subcommands that have a page of their own.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum PageArg {
    /// The page of `pondus fit`.
    Fit,
    /// The page of `pondus plan`.
    Plan,
    /// The page of `pondus sites`.
    Sites,
    /// The page of `pondus sql`.
    Sql,
}

impl PageArg {
    /// The subcommand's name.
    fn name(self) -> &'static str {
        match self {
            PageArg::Fit => "fit",
            PageArg::Plan => "plan",
            PageArg::Sites => "sites",
            PageArg::Sql => "sql",
        }
    }
}

/// Options of `pondus manual`.
#[derive(Debug, Args)]
pub struct ManualArgs {
    /// The subcommand whose page to produce (the top command's page without it).
    #[arg(value_enum, value_name = "COMMAND")]
    pub command: Option<PageArg>,
    /// Write the pages as files into this existing directory (pondus.1 and one per subcommand, or only COMMAND's) instead of printing one.
    #[arg(long, value_name = "DIR")]
    pub out_dir: Option<PathBuf>,
}

/// One manual page: the file name (`pondus.1`, `pondus-fit.1`, …) and its roff text.
///
/// # Errors
/// [`Error::Io`] (rendering) when the page cannot be rendered.
pub fn page(command: Option<PageArg>) -> Result<(String, Vec<u8>)> {
    let mut top = Cli::command();
    // Building gives each subcommand its display name (`pondus-fit`) and
    // usage line (`pondus fit`), which the page's header and synopsis use.
    top.build();
    let cmd = match command {
        None => top,
        Some(p) => top
            .find_subcommand(p.name())
            .cloned()
            .ok_or_else(|| io_err("manual page", std::io::Error::other("unknown subcommand")))?,
    };
    let name = cmd
        .get_display_name()
        .unwrap_or_else(|| cmd.get_name())
        .to_string();
    let mut bytes = Vec::new();
    clap_mangen::Man::new(cmd)
        .render(&mut bytes)
        .map_err(|e| io_err("manual page", e))?;
    Ok((format!("{name}.1"), bytes))
}

/// The page names are not typed by the user, so `--out-dir` replaces only
/// regular files: an existing link, FIFO or device of a page's name is
/// refused rather than followed or written into.
///
/// # Errors
/// [`Error::Usage`] when `path` exists and is not a regular file.
fn refuse_unless_regular(path: &std::path::Path) -> Result<()> {
    match std::fs::symlink_metadata(path) {
        Ok(m) if !m.file_type().is_file() => Err(Error::usage(
            "--out-dir",
            format!(
                "'{}' exists and is not a regular file; remove it or choose another directory",
                path.display()
            ),
        )),
        _ => Ok(()),
    }
}

/// Prints one page, or writes the pages into `--out-dir`.
///
/// # Errors
/// [`Error::Usage`] when `--out-dir` is not an existing directory, or the
/// error of writing a page.
pub fn run_manual(args: &ManualArgs) -> Result<()> {
    let mut out = Outputs::new();
    match &args.out_dir {
        None => out.print(String::from_utf8_lossy(&page(args.command)?.1).into_owned()),
        Some(dir) => {
            if !dir.is_dir() {
                return Err(Error::usage(
                    "--out-dir",
                    format!(
                        "'{}' is not a directory; give an existing one",
                        dir.display()
                    ),
                ));
            }
            let pages: Vec<Option<PageArg>> = match args.command {
                Some(p) => vec![Some(p)],
                None => std::iter::once(None)
                    .chain(PageArg::value_variants().iter().copied().map(Some))
                    .collect(),
            };
            for p in pages {
                let (name, bytes) = page(p)?;
                let path = dir.join(name);
                refuse_unless_regular(&path)?;
                out.add("--out-dir", &Target::File(path), bytes);
            }
        }
    }
    out.write()
}
