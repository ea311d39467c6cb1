//! Writing output files safely: never over an input, always atomically.

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

/// Writes `bytes` to `path` atomically: into a temporary file in the same
/// directory, flushed to disk, then renamed over the target. An existing
/// file is replaced only when the new one is complete.
///
/// # Errors
/// [`Error::Io`] when the directory is not writable or the rename fails.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let io = |source| Error::Io {
        path: path.display().to_string(),
        action: "writing",
        source,
    };
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
        f.sync_all()?;
        std::fs::rename(&tmp, path)
    })();
    if let Err(e) = result {
        let _ = std::fs::remove_file(&tmp);
        return Err(io(e));
    }
    Ok(())
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
