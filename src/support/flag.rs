//! The names of the command-line flags, for the library's messages.
//!
//! A library error or note that tells the user which flag to change names it
//! through [`Flag`], not a string literal: the binary's tests check every
//! value here against its clap definitions (the flag exists, and exactly the
//! subcommands listed take it), so a renamed or removed flag cannot leave a
//! message that names a flag the tool does not have. A test here scans the
//! library's sources (all of `src/` but the binary's `src/cli/`) and fails on
//! a string literal that spells a flag out.

use std::fmt;

/// Declares [`Flag`], its name and the subcommands that take it, from one table.
macro_rules! flags {
    ($($variant:ident => $name:literal, [$($command:literal),+];)+) => {
        /// A long flag of the `pondus` command line.
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
        pub enum Flag {
            $(
                #[doc = concat!("`", $name, "`.")]
                $variant,
            )+
        }

        impl Flag {
            /// Every flag, in the order `pondus <command> --help` first lists it
            /// (fit, plan, sites, sql).
            pub const ALL: &'static [Flag] = &[$(Flag::$variant),+];

            /// The flag as typed, with its leading `--` (e.g. `"--probe"`).
            pub fn name(self) -> &'static str {
                match self {
                    $(Flag::$variant => $name,)+
                }
            }

            /// The subcommands that take this flag.
            pub fn commands(self) -> &'static [&'static str] {
                match self {
                    $(Flag::$variant => &[$($command),+],)+
                }
            }
        }
    };
}

flags! {
    Measure => "--measure", ["fit", "plan"];
    Col => "--col", ["fit"];
    Label => "--label", ["fit"];
    Moderator => "--moderator", ["fit", "sites"];
    Categorical => "--categorical", ["fit"];
    Reference => "--reference", ["fit"];
    Interaction => "--interaction", ["fit"];
    Center => "--center", ["fit"];
    Tau2 => "--tau2", ["fit", "plan", "sites"];
    Inference => "--inference", ["fit", "sites"];
    Level => "--level", ["fit", "sites"];
    At => "--at", ["fit"];
    Json => "--json", ["fit", "plan", "sites"];
    Table => "--table", ["fit", "sql"];
    Forest => "--forest", ["fit"];
    Sort => "--sort", ["fit"];
    ShowFitted => "--show-fitted", ["fit"];
    Bubble => "--bubble", ["fit"];
    BubbleX => "--bubble-x", ["fit"];
    Funnel => "--funnel", ["fit"];
    Contours => "--contours", ["fit"];
    Width => "--width", ["fit"];
    Height => "--height", ["fit"];
    Quiet => "--quiet", ["fit", "plan", "sites"];
    Report => "--report", ["fit", "plan", "sites"];
    Probe => "--probe", ["fit"];
    CompareLevels => "--compare-levels", ["fit"];
    Regions => "--regions", ["fit"];
    ReliabilityX => "--reliability-x", ["fit"];
    ReliabilityY => "--reliability-y", ["fit"];
    RangeRatio => "--range-ratio", ["fit"];
    Loo => "--loo", ["fit"];
    Influence => "--influence", ["fit"];
    Permutations => "--permutations", ["fit"];
    Seed => "--seed", ["fit", "plan"];
    SmallStudy => "--small-study", ["fit"];
    CumulativeBy => "--cumulative-by", ["fit"];
    Cluster => "--cluster", ["fit"];
    Levels => "--levels", ["fit"];
    Robust => "--robust", ["fit", "sites"];
    K => "--k", ["plan"];
    N => "--n", ["plan"];
    Variance => "--variance", ["plan"];
    ModeratorSd => "--moderator-sd", ["plan"];
    Share => "--share", ["plan"];
    ModeratorValues => "--moderator-values", ["plan"];
    ModeratorEffect => "--moderator-effect", ["plan"];
    Alpha => "--alpha", ["plan"];
    Test => "--test", ["plan"];
    TargetPower => "--target-power", ["plan"];
    Solve => "--solve", ["plan"];
    MaxK => "--max-k", ["plan"];
    MaxN => "--max-n", ["plan"];
    Simulate => "--simulate", ["plan"];
    Curve => "--curve", ["plan"];
    Site => "--site", ["sites", "sql"];
    X => "--x", ["sites", "sql"];
    Y => "--y", ["sites", "sql"];
    W => "--w", ["sites", "sql"];
    Covariate => "--covariate", ["sites", "sql"];
    Moments => "--moments", ["sites"];
    Info => "--info", ["sites"];
    InfoKey => "--info-key", ["sites"];
    Out => "--out", ["sites"];
    CenterWithin => "--center-within", ["sites"];
    Fit => "--fit", ["sites"];
}

impl fmt::Display for Flag {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl From<Flag> for String {
    fn from(flag: Flag) -> Self {
        flag.name().to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_distinct_long_flags() {
        let mut seen = std::collections::HashSet::new();
        for f in Flag::ALL {
            let name = f.name();
            assert!(name.starts_with("--") && name.len() > 2, "{name}");
            assert!(
                name[2..]
                    .chars()
                    .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '-'),
                "{name}"
            );
            assert!(seen.insert(name), "{name} twice");
            assert!(!f.commands().is_empty(), "{name}");
        }
        assert_eq!(Flag::Probe.to_string(), "--probe");
        assert_eq!(String::from(Flag::CompareLevels), "--compare-levels");
    }

    /// Whether `c` can be part of an identifier (so an `r` before it is no
    /// raw-string prefix).
    fn ident(c: Option<&char>) -> bool {
        c.is_some_and(|c| c.is_alphanumeric() || *c == '_')
    }

    /// The end (exclusive) of the literal opened by the `"` at `open`, with
    /// `hashes` `#` after its closing quote (a raw string when `raw`).
    fn literal_end(src: &[char], open: usize, raw: bool, hashes: usize) -> usize {
        let mut i = open + 1;
        while i < src.len() {
            match src[i] {
                '\\' if !raw => i += 2,
                '"' if src[i + 1..]
                    .iter()
                    .take(hashes)
                    .filter(|&&c| c == '#')
                    .count()
                    == hashes =>
                {
                    return i;
                }
                _ => i += 1,
            }
        }
        src.len()
    }

    /// The string literals of Rust source `text` that can reach a message,
    /// with the line each starts on: comments (doc comments too) are
    /// skipped, and so are the items under `#[cfg(test)]` and the table of
    /// the `flags!` invocation.
    fn message_literals(text: &str) -> Vec<(usize, String)> {
        let src: Vec<char> = text.chars().collect();
        let at = |i: usize, s: &str| {
            s.chars()
                .enumerate()
                .all(|(k, c)| src.get(i + k) == Some(&c))
        };
        let mut out = Vec::new();
        let (mut i, mut line, mut depth) = (0, 1, 0usize);
        // The brace depth of the block being skipped; whether the next block is.
        let (mut skipping, mut skip_next): (Option<usize>, bool) = (None, false);
        while i < src.len() {
            let c = src[i];
            let prev = i.checked_sub(1).and_then(|p| src.get(p));
            if at(i, "//") {
                while i < src.len() && src[i] != '\n' {
                    i += 1;
                }
                continue;
            }
            if at(i, "/*") {
                let mut nest = 0;
                while i < src.len() {
                    if at(i, "/*") {
                        nest += 1;
                        i += 2;
                    } else if at(i, "*/") {
                        nest -= 1;
                        i += 2;
                        if nest == 0 {
                            break;
                        }
                    } else {
                        line += usize::from(src[i] == '\n');
                        i += 1;
                    }
                }
                continue;
            }
            let raw_hashes = (c == 'r' && (!ident(prev) || prev == Some(&'b')))
                .then(|| src[i + 1..].iter().take_while(|&&c| c == '#').count())
                .filter(|&h| src.get(i + 1 + h) == Some(&'"'));
            if c == '"' || raw_hashes.is_some() {
                let hashes = raw_hashes.unwrap_or(0);
                let open = if raw_hashes.is_some() {
                    i + 1 + hashes
                } else {
                    i
                };
                let end = literal_end(&src, open, raw_hashes.is_some(), hashes);
                if skipping.is_none() {
                    out.push((line, src[open + 1..end].iter().collect()));
                }
                line += src[i..end].iter().filter(|&&c| c == '\n').count();
                i = end + 1 + hashes;
                continue;
            }
            match c {
                '\'' if src.get(i + 1) == Some(&'\\') => {
                    i += 3;
                    while i < src.len() && src[i] != '\'' {
                        i += 1;
                    }
                }
                '\'' if src.get(i + 2) == Some(&'\'') => i += 2,
                '\n' => line += 1,
                '#' if at(i, "#[cfg(test)]") => skip_next = true,
                'f' if at(i, "flags!") && !ident(prev) => skip_next = true,
                ';' => skip_next = false,
                '{' => {
                    depth += 1;
                    if skip_next && skipping.is_none() {
                        skipping = Some(depth);
                    }
                    skip_next = false;
                }
                '}' => {
                    if skipping == Some(depth) {
                        skipping = None;
                    }
                    depth = depth.saturating_sub(1);
                }
                _ => {}
            }
            i += 1;
        }
        out
    }

    /// The flags written out as `--name` in `literal`.
    fn flags_in(literal: &str) -> Vec<Flag> {
        let mut out = Vec::new();
        for (k, _) in literal.match_indices("--") {
            let name: String = literal[k + 2..]
                .chars()
                .take_while(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || *c == '-')
                .collect();
            if let Some(f) = Flag::ALL.iter().find(|f| f.name()[2..] == name) {
                out.push(*f);
            }
        }
        out
    }

    /// Every `.rs` file under `dir`.
    fn rust_files(dir: &std::path::Path, out: &mut Vec<std::path::PathBuf>) {
        for entry in std::fs::read_dir(dir).expect("source folder") {
            let path = entry.expect("source entry").path();
            if path.is_dir() {
                rust_files(&path, out);
            } else if path.extension().is_some_and(|e| e == "rs") {
                out.push(path);
            }
        }
    }

    #[test]
    fn the_scanner_finds_flag_literals_in_code_only() {
        let text = "//! uses `--probe`\n\
                    /// \"--probe\" in a doc comment\n\
                    fn f() -> String { let c = '\"'; let q = '\\''; \n\
                    /* \"--regions\" */ format!(\"e.g. --probe {}\", r#\"--at \"x\"\"#) }\n\
                    const A: &str = \"--width: not --widths, var(--accent) or -- x\";\n\
                    #[cfg(test)]\nmod tests { const B: &str = \"--json\"; }\n\
                    flags! { Loo => \"--loo\", [\"fit\"]; }\n\
                    const C: &str = \"--moderator-sd\";\n";
        let found: Vec<(usize, Vec<Flag>)> = message_literals(text)
            .into_iter()
            .map(|(line, l)| (line, flags_in(&l)))
            .filter(|(_, f)| !f.is_empty())
            .collect();
        assert_eq!(
            found,
            [
                (4, vec![Flag::Probe]),
                (4, vec![Flag::At]),
                (5, vec![Flag::Width]),
                (9, vec![Flag::ModeratorSd]),
            ]
        );
    }

    /// Library messages name flags through [`Flag`]: no string literal in
    /// `src/` outside the binary's `src/cli/` spells out a flag.
    #[test]
    fn library_literals_name_no_flag() {
        let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
        let mut files = Vec::new();
        rust_files(&root, &mut files);
        files.sort();
        let mut found = Vec::new();
        // src/render/ is being split on another branch; its literals are
        // replaced when that lands, and this exception goes with them.
        let pending = root.join("render");
        for path in files
            .iter()
            .filter(|p| !p.starts_with(root.join("cli")) && !p.starts_with(&pending))
        {
            let text = std::fs::read_to_string(path).expect("readable source");
            for (line, literal) in message_literals(&text) {
                for flag in flags_in(&literal) {
                    let shown = path
                        .strip_prefix(env!("CARGO_MANIFEST_DIR"))
                        .unwrap_or(path);
                    found.push(format!("{}:{line}: {flag}", shown.display()));
                }
            }
        }
        assert!(
            found.is_empty(),
            "flags written as string literals (use Flag instead):\n{}",
            found.join("\n")
        );
    }
}
