//! Writing output files safely: never over an input, always atomically, and
//! all of a run's outputs or none of them.
//!
//! A run renders every output in memory and hands it to an [`Outputs`];
//! [`Outputs::write`] puts each file first into a temporary file next to its
//! destination and renames them into place only when all are complete.

use pondus::error::{Error, Result};
use std::io::Write;
use std::path::{Path, PathBuf};

/// Where one output goes.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Target {
    /// Standard output (`-`).
    Stdout,
    /// A file, written atomically.
    File(PathBuf),
}

impl Target {
    /// `-` means standard output.
    pub fn from_arg(p: &Path) -> Self {
        if p.as_os_str() == "-" {
            Target::Stdout
        } else {
            Target::File(p.to_path_buf())
        }
    }
}

fn same_file(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    }
}

/// Checks a set of outputs against the input and each other.
///
/// # Errors
/// [`Error::Usage`] when an output would overwrite the input, two outputs
/// share a path, or more than one output goes to standard output.
pub fn check_targets(input: Option<&Path>, outputs: &[(&str, &Target)]) -> Result<()> {
    let mut stdout_users = Vec::new();
    for (i, (flag, t)) in outputs.iter().enumerate() {
        match t {
            Target::Stdout => stdout_users.push(*flag),
            Target::File(p) => {
                if let Some(inp) = input {
                    if same_file(inp, p) {
                        return Err(Error::usage(
                            *flag,
                            format!(
                                "'{}' is the input file; pondus never writes over its input. Choose another path",
                                p.display()
                            ),
                        ));
                    }
                }
                if p.is_dir() {
                    return Err(Error::usage(
                        *flag,
                        format!("'{}' is a directory; give a file path", p.display()),
                    ));
                }
                for (flag2, t2) in &outputs[..i] {
                    if let Target::File(q) = t2 {
                        if same_file(p, q) {
                            return Err(Error::usage(
                                *flag,
                                format!("'{}' is also the path of {flag2}; give each output its own file", p.display()),
                            ));
                        }
                    }
                }
            }
        }
    }
    if stdout_users.len() > 1 {
        return Err(Error::usage(
            stdout_users[1],
            format!(
                "only one output can go to standard output ('-'); {} both ask for it",
                stdout_users.join(" and ")
            ),
        ));
    }
    Ok(())
}

/// An output file written completely under a temporary name in its
/// destination's directory, waiting to be renamed into place.
#[derive(Debug)]
struct Staged {
    /// The temporary file.
    tmp: PathBuf,
    /// The destination.
    path: PathBuf,
}

/// The error of writing `path`.
fn write_error(path: &Path, source: std::io::Error) -> Error {
    Error::Io {
        path: path.display().to_string(),
        action: "writing",
        source,
    }
}

impl Staged {
    /// Writes `bytes` into a temporary file in `path`'s directory, flushed to disk.
    ///
    /// # Errors
    /// [`Error::Io`] (for `path`) when the directory is not writable; no temporary file is left.
    fn new(path: &Path, bytes: &[u8]) -> Result<Self> {
        let dir = match path.parent() {
            Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
            _ => PathBuf::from("."),
        };
        let name = path
            .file_name()
            .map(|n| n.to_string_lossy().to_string())
            .unwrap_or_else(|| "output".into());
        let tmp = dir.join(format!(".{name}.pondus-{}.tmp", std::process::id()));
        let result = (|| {
            let mut f = std::fs::File::create(&tmp)?;
            f.write_all(bytes)?;
            f.sync_all()
        })();
        if let Err(e) = result {
            let _ = std::fs::remove_file(&tmp);
            return Err(write_error(path, e));
        }
        Ok(Staged {
            tmp,
            path: path.to_path_buf(),
        })
    }

    /// Renames the temporary file over the destination.
    ///
    /// # Errors
    /// [`Error::Io`] when the rename fails; the temporary file is removed.
    fn place(self) -> Result<()> {
        std::fs::rename(&self.tmp, &self.path).map_err(|e| {
            let _ = std::fs::remove_file(&self.tmp);
            write_error(&self.path, e)
        })
    }

    /// Removes the temporary file (the output is not written).
    fn discard(self) {
        let _ = std::fs::remove_file(&self.tmp);
    }
}

/// Writes `bytes` to `path` atomically: into a temporary file in the same
/// directory, flushed to disk, then renamed over the target. An existing
/// file is replaced only when the new one is complete.
///
/// # Errors
/// [`Error::Io`] when the directory is not writable or the rename fails.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    Staged::new(path, bytes)?.place()
}

/// Every output of one run, rendered in memory, written together by
/// [`Outputs::write`] once the run has rendered all of them.
#[derive(Debug, Default)]
pub struct Outputs {
    /// The outputs in the order they were added.
    pending: Vec<(Target, Vec<u8>)>,
}

impl Outputs {
    /// No outputs yet.
    pub fn new() -> Self {
        Self::default()
    }

    /// Adds one rendered output.
    pub fn add(&mut self, target: &Target, bytes: impl Into<Vec<u8>>) {
        self.pending.push((target.clone(), bytes.into()));
    }

    /// Writes every output. Each file goes first into a temporary file next
    /// to it, flushed to disk; when one of these cannot be written, every
    /// temporary file is removed and no output is touched. Only when all are
    /// complete are they renamed over their destinations (in the order they
    /// were added), and then standard output is written.
    ///
    /// # Errors
    /// [`Error::Io`] for the first file that cannot be written or renamed,
    /// or the write error of standard output.
    pub fn write(self) -> Result<()> {
        let mut staged = Vec::new();
        for (target, bytes) in &self.pending {
            if let Target::File(p) = target {
                match Staged::new(p, bytes) {
                    Ok(s) => staged.push(s),
                    Err(e) => {
                        staged.into_iter().for_each(Staged::discard);
                        return Err(e);
                    }
                }
            }
        }
        let mut staged = staged.into_iter();
        while let Some(s) = staged.next() {
            if let Err(e) = s.place() {
                staged.for_each(Staged::discard);
                return Err(e);
            }
        }
        for (target, bytes) in &self.pending {
            if *target == Target::Stdout {
                emit(target, bytes)?;
            }
        }
        Ok(())
    }
}

/// Writes to a target: standard output directly, a file atomically.
///
/// # Errors
/// As [`write_atomic`], or the stdout write error.
pub fn emit(target: &Target, bytes: &[u8]) -> Result<()> {
    match target {
        Target::Stdout => {
            let mut out = std::io::stdout().lock();
            out.write_all(bytes)
                .and_then(|_| out.flush())
                .map_err(|source| Error::Io {
                    path: "<stdout>".into(),
                    action: "writing",
                    source,
                })
        }
        Target::File(p) => write_atomic(p, bytes),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn atomic_write_replaces_and_leaves_no_temp() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("out.json");
        write_atomic(&p, b"one").unwrap();
        write_atomic(&p, b"two").unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"two");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    #[test]
    fn outputs_are_written_together_or_not_at_all() {
        let dir = tempfile::tempdir().unwrap();
        let a = dir.path().join("a.json");
        let b = dir.path().join("b.csv");
        let mut all = Outputs::new();
        all.add(&Target::File(a.clone()), b"one".to_vec());
        all.add(&Target::File(b.clone()), "two");
        all.write().unwrap();
        assert_eq!(std::fs::read(&a).unwrap(), b"one");
        assert_eq!(std::fs::read(&b).unwrap(), b"two");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 2);

        // The second output's directory does not exist: the first file is
        // neither replaced nor left as a temporary file.
        let mut some = Outputs::new();
        some.add(&Target::File(a.clone()), "new");
        some.add(&Target::File(dir.path().join("missing/c.svg")), "three");
        let e = some.write().unwrap_err();
        assert!(e.to_string().contains("missing"), "{e}");
        assert_eq!(std::fs::read(&a).unwrap(), b"one");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 2);
    }

    #[test]
    fn refuses_input_and_clashes() {
        let dir = tempfile::tempdir().unwrap();
        let inp = dir.path().join("in.csv");
        std::fs::write(&inp, "x").unwrap();
        let t = Target::File(inp.clone());
        assert!(check_targets(Some(&inp), &[("--json", &t)]).is_err());
        let a = Target::File(dir.path().join("a"));
        assert!(check_targets(Some(&inp), &[("--json", &a), ("--table", &a)]).is_err());
        assert!(check_targets(
            Some(&inp),
            &[("--json", &Target::Stdout), ("--table", &Target::Stdout)]
        )
        .is_err());
        assert!(check_targets(Some(&inp), &[("--json", &a), ("--table", &Target::Stdout)]).is_ok());
    }
}
