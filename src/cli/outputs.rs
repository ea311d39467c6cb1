//! Writing output files safely: never over an input, always atomically, and
//! all of a run's outputs or none of them.
//!
//! A run hands every output to an [`Outputs`], either rendered in memory or
//! as a renderer that writes it ([`Outputs::add_streamed`]: large outputs,
//! written through a buffered writer straight into their temporary file);
//! [`Outputs::write`] puts each file first into a temporary file next to its
//! destination and renames them into place only when all are complete.

use super::temps;
use pondus::error::{Error, Result};
use std::io::{self, Write};
use std::path::{Component, Path, PathBuf};

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

/// The folder a path is in (`.` for a bare file name).
fn parent_of(p: &Path) -> PathBuf {
    match p.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

/// Follows the symbolic links at the end of `path` (at most 40, as the
/// operating system does) to the path they lead to, which need not exist.
/// Links in the folders above are left to the operating system.
///
/// # Errors
/// The error of reading a link, or of a chain of more than 40 links.
fn follow_links(path: &Path) -> io::Result<PathBuf> {
    let mut p = path.to_path_buf();
    for _ in 0..40 {
        match std::fs::symlink_metadata(&p) {
            Ok(m) if m.file_type().is_symlink() => {
                let to = std::fs::read_link(&p)?;
                p = if to.is_absolute() {
                    to
                } else {
                    parent_of(&p).join(to)
                };
            }
            _ => return Ok(p),
        }
    }
    Err(io::Error::other(format!(
        "more than 40 symbolic links from '{}'",
        path.display()
    )))
}

/// `path` made absolute with `.` and `..` resolved in the text alone.
fn lexical(path: &Path) -> PathBuf {
    let abs = std::path::absolute(path).unwrap_or_else(|_| path.to_path_buf());
    let mut out = PathBuf::new();
    for c in abs.components() {
        match c {
            Component::CurDir => {}
            Component::ParentDir => {
                out.pop();
            }
            other => out.push(other),
        }
    }
    out
}

/// The normalised absolute path of the file a path names, for comparing
/// paths: symbolic links at its end followed, then the canonical path of
/// the file, or (when it does not exist yet) the canonical path of its
/// folder joined with its name; when the folder does not exist either, the
/// absolute path with `.` and `..` resolved in the text.
fn normalise(path: &Path) -> PathBuf {
    let end = follow_links(path).unwrap_or_else(|_| path.to_path_buf());
    if let Ok(c) = end.canonicalize() {
        return c;
    }
    match (end.file_name(), parent_of(&end).canonicalize()) {
        (Some(name), Ok(dir)) => dir.join(name),
        _ => lexical(&end),
    }
}

/// Whether two paths name the same file (see [`normalise`]).
fn same_file(a: &Path, b: &Path) -> bool {
    normalise(a) == normalise(b)
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

/// A folder that an output cannot go into: missing, or not a folder.
#[derive(Debug)]
struct FolderProblem {
    /// The folder.
    dir: PathBuf,
    /// Whether it is missing (or else not a folder).
    missing: bool,
    /// The operating system's error, when there was one.
    cause: Option<io::Error>,
}

impl std::fmt::Display for FolderProblem {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        if self.missing {
            write!(f, "the folder '{}' is missing", self.dir.display())
        } else {
            write!(f, "'{}' is not a folder", self.dir.display())
        }
    }
}

impl std::error::Error for FolderProblem {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        self.cause
            .as_ref()
            .map(|e| e as &(dyn std::error::Error + 'static))
    }
}

/// Checks that the folder `dest` goes into exists and is a folder.
///
/// # Errors
/// An [`io::Error`] carrying a [`FolderProblem`], or the error of looking.
fn check_folder(dest: &Path) -> io::Result<()> {
    let dir = parent_of(dest);
    // A missing folder carries the operating system's NotFound error.
    let problem = |cause: Option<io::Error>| {
        let kind = cause.as_ref().map_or(io::ErrorKind::Other, io::Error::kind);
        let missing = cause.is_some();
        let dir = dir.clone();
        io::Error::new(
            kind,
            FolderProblem {
                dir,
                missing,
                cause,
            },
        )
    };
    match std::fs::metadata(&dir) {
        Ok(m) if m.is_dir() => Ok(()),
        Ok(_) => Err(problem(None)),
        Err(e) if e.kind() == io::ErrorKind::NotFound => Err(problem(Some(e))),
        Err(e) => Err(e),
    }
}

/// The error of writing the output of `flag` to `path` (as the user gave
/// it). A broken pipe (a FIFO whose reader went away) is a failure here,
/// not the quiet end that it is for standard output, so it is wrapped. A
/// streamed output's renderer failing is reported as a rendering error
/// (`<JSON output>: rendering failed: ...`), as for an output rendered in
/// memory.
fn write_error(flag: &str, path: &Path, source: io::Error) -> Error {
    let source = match source.get_ref().map(|e| e.is::<RenderFailure>()) {
        Some(true) => {
            let inner = source.into_inner().expect("checked above");
            let failure = inner.downcast::<RenderFailure>().expect("checked above");
            return Error::Io {
                path: format!("<{} output>", failure.what),
                action: "rendering",
                source: failure.source,
            };
        }
        _ => source,
    };
    let source = if source.kind() == io::ErrorKind::BrokenPipe {
        io::Error::other(source)
    } else {
        source
    };
    let path = if flag.is_empty() {
        path.display().to_string()
    } else {
        format!("{flag}: {}", path.display())
    };
    Error::Io {
        path,
        action: "writing",
        source,
    }
}

/// How one output file is written.
#[derive(Debug)]
enum Prepared {
    /// Complete in a temporary file next to the destination, waiting to be
    /// renamed onto it (a new path, or a regular file that is replaced).
    Staged {
        /// The temporary file.
        tmp: PathBuf,
        /// The destination: the path given, or where its symbolic links lead.
        dest: PathBuf,
    },
    /// A special file (a FIFO, a device): opened and written directly,
    /// never replaced.
    Direct(PathBuf),
}

impl Prepared {
    /// Gets `content` ready for `path`: its symbolic links followed, its
    /// folder checked, and (unless the destination is a special file) the
    /// content written to a temporary file next to the destination (a
    /// streamed one through a buffered writer), flushed to disk, carrying
    /// the permission bits and owner of the file it replaces.
    ///
    /// # Errors
    /// [`io::Error`] when a link cannot be read, the folder is missing or is
    /// not a folder, the destination is a folder, or the temporary file
    /// cannot be written or its renderer fails; no temporary file is left.
    fn new(path: &Path, content: &Content<'_>) -> io::Result<Self> {
        let dest = follow_links(path)?;
        let existing = match std::fs::metadata(&dest) {
            Ok(m) if m.is_dir() => {
                return Err(io::Error::other(format!(
                    "'{}' is a folder",
                    dest.display()
                )))
            }
            Ok(m) if !m.is_file() => return Ok(Prepared::Direct(dest)),
            Ok(m) => Some(m),
            Err(e) => {
                check_folder(&dest)?;
                if e.kind() != io::ErrorKind::NotFound {
                    return Err(e);
                }
                None
            }
        };
        let name = dest
            .file_name()
            .map(|n| n.to_string_lossy().to_string())
            .unwrap_or_else(|| "output".into());
        let tmp = parent_of(&dest).join(format!(".{name}.pondus-{}.tmp", std::process::id()));
        let mut file = temps::create(&tmp)?;
        let result = (|| {
            if let Some(m) = &existing {
                keep_owner_and_mode(&file, m)?;
            }
            match content {
                Content::Bytes(bytes) => file.write_all(bytes)?,
                Content::Streamed(render) => {
                    let mut sink: Sink<'_> = io::BufWriter::with_capacity(STREAM_BUFFER, &mut file);
                    render(&mut sink)?;
                    sink.flush()?;
                }
            }
            file.sync_all()
        })();
        match result {
            Ok(()) => Ok(Prepared::Staged { tmp, dest }),
            Err(e) => {
                temps::remove(&tmp);
                Err(e)
            }
        }
    }

    /// Writes a special file directly (its content rendered in memory
    /// first); a staged file waits for [`Prepared::place`].
    ///
    /// # Errors
    /// The error of opening or writing the special file (ENOSPC, EPIPE, ...).
    fn write_direct(&self, content: &Content<'_>) -> io::Result<()> {
        if let Prepared::Direct(path) = self {
            let bytes = content.render()?;
            let mut f = std::fs::OpenOptions::new().write(true).open(path)?;
            f.write_all(&bytes)?;
            f.flush()?;
        }
        Ok(())
    }

    /// Renames a staged file onto its destination.
    ///
    /// # Errors
    /// The error of the rename; the temporary file is removed.
    fn place(self) -> io::Result<()> {
        match self {
            Prepared::Staged { tmp, dest } => temps::rename(&tmp, &dest),
            Prepared::Direct(_) => Ok(()),
        }
    }

    /// Removes a staged file's temporary file (the output is not written).
    fn discard(self) {
        if let Prepared::Staged { tmp, .. } = self {
            temps::remove(&tmp);
        }
    }
}

/// Gives the temporary file the owner (where allowed; a failure is
/// ignored) and the permission bits of the file it will replace.
///
/// # Errors
/// The error of setting the permission bits.
#[cfg(unix)]
fn keep_owner_and_mode(file: &std::fs::File, old: &std::fs::Metadata) -> io::Result<()> {
    use std::os::unix::fs::{MetadataExt, PermissionsExt};
    // The owner first: changing it may clear the set-id bits set below.
    let _ = std::os::unix::fs::fchown(file, Some(old.uid()), Some(old.gid()));
    file.set_permissions(std::fs::Permissions::from_mode(old.mode() & 0o7777))
}

/// Gives the temporary file the permissions of the file it will replace.
///
/// # Errors
/// The error of setting the permissions.
#[cfg(not(unix))]
fn keep_owner_and_mode(file: &std::fs::File, old: &std::fs::Metadata) -> io::Result<()> {
    file.set_permissions(old.permissions())
}

/// The size of the buffered writer a streamed output is written through.
const STREAM_BUFFER: usize = 1 << 20;

/// What a streamed output is written to: a buffered writer, a concrete type
/// so that a renderer's many small writes are plain copies into the buffer
/// (only the buffer's flushes go through the `dyn` writer).
pub type Sink<'w> = io::BufWriter<&'w mut dyn Write>;

/// A renderer of a streamed output: writes the whole output to the sink.
/// Its own failures (not the writer's) are wrapped in a [`RenderFailure`].
pub type Render<'a> = Box<dyn Fn(&mut Sink<'_>) -> io::Result<()> + 'a>;

/// A renderer's own failure, carried through [`io::Error`] so that it is
/// reported as a rendering error (as an output rendered in memory is), not
/// as an error of writing the file.
#[derive(Debug)]
pub struct RenderFailure {
    /// What was being rendered ("JSON", "table").
    pub what: &'static str,
    /// The renderer's error.
    pub source: io::Error,
}

impl std::fmt::Display for RenderFailure {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        self.source.fmt(f)
    }
}

impl std::error::Error for RenderFailure {}

impl RenderFailure {
    /// Wraps a renderer's failure in an [`io::Error`].
    pub fn wrap(what: &'static str, source: io::Error) -> io::Error {
        io::Error::other(RenderFailure { what, source })
    }
}

/// An output's content: rendered in memory, or rendered while it is written.
enum Content<'a> {
    /// The bytes.
    Bytes(Vec<u8>),
    /// The renderer (see [`Outputs::add_streamed`]).
    Streamed(Render<'a>),
}

impl std::fmt::Debug for Content<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Content::Bytes(b) => write!(f, "Bytes({} bytes)", b.len()),
            Content::Streamed(_) => f.write_str("Streamed"),
        }
    }
}

impl Content<'_> {
    /// The content in memory (a streamed one rendered into a buffer).
    ///
    /// # Errors
    /// The renderer's error.
    fn render(&self) -> io::Result<std::borrow::Cow<'_, [u8]>> {
        match self {
            Content::Bytes(b) => Ok(std::borrow::Cow::Borrowed(b)),
            Content::Streamed(render) => {
                let mut buf = Vec::new();
                let mut sink: Sink<'_> = io::BufWriter::new(&mut buf);
                render(&mut sink)?;
                sink.flush()?;
                drop(sink);
                Ok(std::borrow::Cow::Owned(buf))
            }
        }
    }
}

/// Every output of one run, rendered in memory or by a renderer that
/// writes it, written together by [`Outputs::write`].
#[derive(Debug, Default)]
pub struct Outputs<'a> {
    /// The outputs in the order they were added, each with its flag.
    pending: Vec<(&'static str, Target, Content<'a>)>,
}

impl<'a> Outputs<'a> {
    /// No outputs yet.
    pub fn new() -> Self {
        Self::default()
    }

    /// Adds one rendered output, asked for by `flag` (named in its errors).
    pub fn add(&mut self, flag: &'static str, target: &Target, bytes: impl Into<Vec<u8>>) {
        self.pending
            .push((flag, target.clone(), Content::Bytes(bytes.into())));
    }

    /// Adds one output, asked for by `flag`, that `render` writes when the
    /// outputs are written: into the temporary file of its destination
    /// through a buffered writer, so that a large output is never held in
    /// memory whole. Standard output and special files get it rendered in
    /// memory first (they cannot be taken back when the renderer fails), so
    /// the guarantees of [`Outputs::write`] hold as for [`Outputs::add`]: a
    /// renderer that fails leaves no output placed.
    pub fn add_streamed(
        &mut self,
        flag: &'static str,
        target: &Target,
        render: impl Fn(&mut Sink<'_>) -> io::Result<()> + 'a,
    ) {
        self.pending
            .push((flag, target.clone(), Content::Streamed(Box::new(render))));
    }

    /// Adds the terminal report, printed on standard output. Labels in it
    /// come from data files, so control characters and bidirectional
    /// overrides are replaced first ([`pondus::support::text::terminal`]);
    /// the colour of `--color` ([`super::style::paint`]) is added after
    /// this step, so it is the only escape the text can hold.
    pub fn print(&mut self, text: impl Into<String>) {
        let text = text.into();
        let safe = pondus::support::text::terminal(&text).into_owned();
        let shown = if super::style::colour() {
            super::style::paint(&safe)
        } else {
            safe
        };
        self.add("", &Target::Stdout, shown);
    }

    /// Writes every output. First standard output's content is rendered in
    /// memory; then each file is prepared (see [`Prepared::new`]): its
    /// folder checked and its content written to a temporary file next to
    /// it, flushed to disk; when one cannot be (or its renderer fails),
    /// every temporary file is removed and no output is touched. Then
    /// special files (FIFOs, devices) are written directly; then the
    /// temporary files are renamed over their destinations (in the order
    /// they were added); then standard output is written.
    ///
    /// # Errors
    /// [`Error::Io`] naming the flag and the path of the first file that
    /// cannot be written or renamed, or the write error of standard output.
    pub fn write(self) -> Result<()> {
        let mut stdout = Vec::new();
        for (flag, target, content) in &self.pending {
            if *target == Target::Stdout {
                let bytes = content
                    .render()
                    .map_err(|e| write_error(flag, Path::new("<stdout>"), e))?;
                stdout.push(bytes);
            }
        }
        let mut prepared = Vec::new();
        for (flag, target, content) in &self.pending {
            if let Target::File(p) = target {
                match Prepared::new(p, content) {
                    Ok(x) => prepared.push((*flag, p, content, x)),
                    Err(e) => {
                        prepared.into_iter().for_each(|(.., x)| x.discard());
                        return Err(write_error(flag, p, e));
                    }
                }
            }
        }
        let direct = prepared
            .iter()
            .map(|(flag, p, content, x)| {
                x.write_direct(content).map_err(|e| write_error(flag, p, e))
            })
            .collect::<Result<Vec<()>>>();
        if let Err(e) = direct {
            prepared.into_iter().for_each(|(.., x)| x.discard());
            return Err(e);
        }
        let mut prepared = prepared.into_iter();
        while let Some((flag, p, _, x)) = prepared.next() {
            if let Err(e) = x.place() {
                prepared.for_each(|(.., x)| x.discard());
                return Err(write_error(flag, p, e));
            }
        }
        for bytes in stdout {
            emit(&Target::Stdout, &bytes)?;
        }
        Ok(())
    }
}

/// Writes to a target: standard output directly, a file as [`Outputs::write`] does.
///
/// # Errors
/// As [`Outputs::write`], or the stdout write error.
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
        Target::File(_) => {
            let mut one = Outputs::new();
            one.add("", target, bytes);
            one.write()
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Writes one file as a run's output step does.
    fn write_atomic(p: &Path, bytes: &[u8]) -> Result<()> {
        emit(&Target::File(p.to_path_buf()), bytes)
    }

    /// Keeps the test of `temps::remove_all` from removing this test's files.
    fn one_at_a_time() -> std::sync::MutexGuard<'static, ()> {
        temps::TEST_LOCK.lock().unwrap_or_else(|e| e.into_inner())
    }

    #[test]
    fn atomic_write_replaces_and_leaves_no_temp() {
        let _lock = one_at_a_time();
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("out.json");
        write_atomic(&p, b"one").unwrap();
        write_atomic(&p, b"two").unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"two");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    #[test]
    fn outputs_are_written_together_or_not_at_all() {
        let _lock = one_at_a_time();
        let dir = tempfile::tempdir().unwrap();
        let a = dir.path().join("a.json");
        let b = dir.path().join("b.csv");
        let mut all = Outputs::new();
        all.add("--a", &Target::File(a.clone()), b"one".to_vec());
        all.add("--a", &Target::File(b.clone()), "two");
        all.write().unwrap();
        assert_eq!(std::fs::read(&a).unwrap(), b"one");
        assert_eq!(std::fs::read(&b).unwrap(), b"two");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 2);

        // The second output's directory does not exist: the first file is
        // neither replaced nor left as a temporary file.
        let mut some = Outputs::new();
        some.add("--a", &Target::File(a.clone()), "new");
        some.add(
            "--a",
            &Target::File(dir.path().join("missing/c.svg")),
            "three",
        );
        let e = some.write().unwrap_err();
        assert!(e.to_string().contains("missing"), "{e}");
        assert_eq!(std::fs::read(&a).unwrap(), b"one");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 2);
    }

    #[test]
    fn a_streamed_output_is_written_and_a_failing_renderer_places_nothing() {
        let _lock = one_at_a_time();
        let dir = tempfile::tempdir().unwrap();
        let a = dir.path().join("a.json");
        let b = dir.path().join("b.csv");
        std::fs::write(&a, "old").unwrap();
        let mut all = Outputs::new();
        all.add("--a", &Target::File(b.clone()), "first");
        all.add_streamed("--json", &Target::File(a.clone()), |w| {
            // Larger than the buffer, so that the writer flushes in between.
            for _ in 0..(STREAM_BUFFER / 4 + 10) {
                w.write_all(b"abc\n")?;
            }
            Ok(())
        });
        all.write().unwrap();
        assert_eq!(
            std::fs::read(&a).unwrap().len(),
            4 * (STREAM_BUFFER / 4 + 10)
        );
        assert_eq!(std::fs::read(&b).unwrap(), b"first");

        // A renderer that fails after writing part of its output: neither
        // output is placed, no temporary is left, and the error is a
        // rendering error.
        let mut some = Outputs::new();
        some.add("--a", &Target::File(b.clone()), "second");
        some.add_streamed("--json", &Target::File(a.clone()), |w| {
            w.write_all(b"partial")?;
            Err(RenderFailure::wrap(
                "JSON",
                io::Error::other("cannot render"),
            ))
        });
        let e = format!("{:#}", anyhow::Error::from(some.write().unwrap_err()));
        assert!(
            e.contains("<JSON output>") && e.contains("cannot render"),
            "{e}"
        );
        assert_eq!(
            std::fs::read(&a).unwrap().len(),
            4 * (STREAM_BUFFER / 4 + 10)
        );
        assert_eq!(std::fs::read(&b).unwrap(), b"first");
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

    #[test]
    fn paths_are_compared_after_normalising() {
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        std::fs::create_dir(d.join("sub")).unwrap();
        let new = d.join("x.json");
        for same in [
            d.join(".").join("x.json"),
            d.join("sub").join("..").join("x.json"),
        ] {
            assert!(same_file(&new, &same), "{}", same.display());
        }
        assert!(!same_file(&new, &d.join("sub").join("x.json")));
        // A link to a file that does not exist yet names that file.
        #[cfg(unix)]
        {
            std::os::unix::fs::symlink("x.json", d.join("link")).unwrap();
            assert!(same_file(&new, &d.join("link")));
        }
        // A missing folder: `.` and `..` resolved in the text.
        assert!(same_file(&d.join("no/x.json"), &d.join("no/./y/../x.json")));
    }

    /// The documented choice for hard links: the rename gives the path a
    /// new file; the other name keeps the old content.
    #[test]
    fn a_hard_linked_output_is_replaced_not_written_through() {
        let _lock = one_at_a_time();
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("out.json");
        let other = dir.path().join("other.json");
        std::fs::write(&out, "old").unwrap();
        std::fs::hard_link(&out, &other).unwrap();
        write_atomic(&out, b"new").unwrap();
        assert_eq!(std::fs::read(&out).unwrap(), b"new");
        assert_eq!(std::fs::read(&other).unwrap(), b"old");
    }

    #[test]
    fn a_missing_folder_is_named() {
        let dir = tempfile::tempdir().unwrap();
        let dest = dir.path().join("nope").join("a.json");
        let mut all = Outputs::new();
        all.add("--json", &Target::File(dest.clone()), "{}");
        let e = format!("{:#}", anyhow::Error::from(all.write().unwrap_err()));
        let folder = dir.path().join("nope");
        assert!(e.starts_with("--json: "), "{e}");
        assert!(
            e.contains(&format!("the folder '{}' is missing", folder.display())),
            "{e}"
        );
        assert_eq!(e.matches("(os error").count(), 1, "{e}");

        // A file where the folder should be.
        std::fs::write(&folder, "").unwrap();
        let mut all = Outputs::new();
        all.add("--table", &Target::File(dest), "x");
        let e = format!("{:#}", anyhow::Error::from(all.write().unwrap_err()));
        assert!(e.starts_with("--table: "), "{e}");
        assert!(
            e.contains(&format!("'{}' is not a folder", folder.display())),
            "{e}"
        );
    }
}
