//! The shape of the code, checked: the layers import only downwards, no
//! source file is over 800 lines, no function over 150, the library uses
//! nothing of the command line (clap, indicatif, anyhow), every file opens
//! with a module doc, and no string literal of the library spells out a
//! flag (messages name flags through `Flag`).
//!
//! The layers, top to bottom (docs/architecture.md draws them):
//! `cli → fit/sites/plan/sql → diagnose/model/render → result →
//! effect/input → dist/error/tolerance/support`. A folder may use its own
//! files and any folder of a lower layer; within one layer only the pairs
//! in [`SIDEWAYS`] are allowed.

use crate::util::repo;
use pondus::support::flag::Flag;
use std::path::{Path, PathBuf};

/// The layer of each top-level module of the library (higher = nearer the
/// user). `cli` is the binary and imports the library as `pondus::`.
const LAYERS: &[(&str, u8)] = &[
    ("dist", 0),
    ("error", 0),
    ("tolerance", 0),
    ("support", 0),
    ("effect", 1),
    ("input", 1),
    ("result", 2),
    ("model", 3),
    ("render", 3),
    ("diagnose", 3),
    ("fit", 4),
    ("sites", 4),
    ("plan", 4),
    ("sql", 4),
];

/// Imports allowed within one layer: (from, to).
const SIDEWAYS: &[(&str, &str)] = &[
    // The basic pieces lean on each other: errors carry I/O paths, the
    // distributions read their tolerances, hashing returns typed errors.
    ("dist", "tolerance"),
    ("dist", "error"),
    ("support", "error"),
    ("error", "tolerance"),
    // Effect sizes read cells through the input layer.
    ("effect", "input"),
    ("input", "effect"),
    // Diagnostics refit the model.
    ("diagnose", "model"),
    // The second stage of `pondus sites` is a `pondus fit`.
    ("sites", "fit"),
    // The query computes the per-site moments that `pondus sites --moments`
    // reads back, in the layout of variables the sites job defines.
    ("sql", "sites"),
];

/// Longest source file, in lines.
const MAX_FILE_LINES: usize = 800;
/// Longest function, in lines (from its `fn` line to its closing brace).
const MAX_FN_LINES: usize = 150;

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        if path.is_dir() {
            rust_files(&path, out);
        } else if path.extension().is_some_and(|e| e == "rs") {
            out.push(path);
        }
    }
}

fn sources() -> Vec<(String, String)> {
    let root = repo("src");
    let mut files = Vec::new();
    rust_files(&root, &mut files);
    files.sort();
    files
        .into_iter()
        .map(|p| {
            let rel = p
                .strip_prefix(&root)
                .unwrap()
                .to_string_lossy()
                .replace('\\', "/");
            (rel, std::fs::read_to_string(&p).unwrap())
        })
        .collect()
}

/// The top-level module a file belongs to (`fit/stages.rs` → `fit`,
/// `dist.rs` → `dist`); `cli` for the binary.
fn module_of(rel: &str) -> &str {
    if rel == "main.rs" {
        return "cli";
    }
    let first = rel.split('/').next().unwrap();
    first.strip_suffix(".rs").unwrap_or(first)
}

fn layer(module: &str) -> Option<u8> {
    LAYERS.iter().find(|(m, _)| *m == module).map(|(_, l)| *l)
}

/// The code of a line without its `//` comment (strings containing `//`
/// are rare enough in `use` paths not to matter here).
fn code(line: &str) -> &str {
    match line.find("//") {
        Some(i) => &line[..i],
        None => line,
    }
}

/// Every `crate::NAME` a file's code mentions, with the line number.
fn crate_paths(text: &str) -> Vec<(usize, String)> {
    let mut found = Vec::new();
    for (i, line) in text.lines().enumerate() {
        let mut rest = code(line);
        while let Some(at) = rest.find("crate::") {
            let tail = &rest[at + "crate::".len()..];
            let name: String = tail
                .chars()
                .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
                .collect();
            if !name.is_empty() {
                found.push((i + 1, name));
            }
            rest = tail;
        }
        // `use crate::{a, b}` names several at once.
        let trimmed = code(line).trim();
        if let Some(list) = trimmed.strip_prefix("use crate::{") {
            for part in list.trim_end_matches("};").split(',') {
                let name: String = part
                    .trim()
                    .chars()
                    .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
                    .collect();
                if !name.is_empty() {
                    found.push((i + 1, name));
                }
            }
        }
    }
    found
}

/// Layer violations of one file as "file:line: a → b" lines.
fn violations(rel: &str, text: &str) -> Vec<String> {
    let from = module_of(rel);
    let Some(from_layer) = layer(from) else {
        return Vec::new();
    };
    crate_paths(text)
        .into_iter()
        .filter_map(|(line, to)| {
            if to == from || to == "Error" || to == "Result" {
                return None;
            }
            let to_layer = layer(&to)?;
            let allowed = to_layer < from_layer
                || (to_layer == from_layer && SIDEWAYS.contains(&(from, to.as_str())));
            (!allowed).then(|| format!("src/{rel}:{line}: {from} → {to}"))
        })
        .collect()
}

#[test]
fn imports_point_only_down_the_layers() {
    let bad: Vec<String> = sources()
        .iter()
        .flat_map(|(rel, text)| violations(rel, text))
        .collect();
    assert!(
        bad.is_empty(),
        "imports against the layers:\n{}",
        bad.join("\n")
    );
}

#[test]
fn the_layer_check_catches_an_upward_import() {
    let upward = "use crate::fit::run;\nfn f() { crate::render::text::render(); }\n";
    let found = violations("model/probe.rs", upward);
    assert_eq!(found.len(), 2, "{found:?}");
    assert!(violations("model/probe.rs", "use crate::result::FitReport;\n").is_empty());
    assert_eq!(
        violations("render/text.rs", "use crate::model::design;\n").len(),
        1
    );
    assert!(violations("diagnose/loo.rs", "use crate::model::fit_parts;\n").is_empty());
}

#[test]
fn every_module_is_placed_in_a_layer() {
    for (rel, _) in sources() {
        let module = module_of(&rel);
        if rel == "lib.rs" || module == "cli" {
            continue;
        }
        assert!(
            layer(module).is_some(),
            "src/{rel}: module '{module}' has no layer in LAYERS"
        );
    }
}

#[test]
fn no_source_file_is_over_the_limit() {
    let long: Vec<String> = sources()
        .iter()
        .map(|(rel, text)| (rel, text.lines().count()))
        .filter(|(_, n)| *n > MAX_FILE_LINES)
        .map(|(rel, n)| format!("src/{rel}: {n} lines"))
        .collect();
    assert!(
        long.is_empty(),
        "files over {MAX_FILE_LINES} lines:\n{}",
        long.join("\n")
    );
}

/// Functions and their lengths in lines: from a line whose code starts a
/// `fn` item to the line where its braces balance again. Braces inside
/// string and character literals are skipped.
fn functions(text: &str) -> Vec<(usize, String, usize)> {
    let lines: Vec<&str> = text.lines().collect();
    let mut out = Vec::new();
    for (i, line) in lines.iter().enumerate() {
        let t = code(line).trim_start();
        let t = t
            .trim_start_matches("pub(crate) ")
            .trim_start_matches("pub(super) ")
            .trim_start_matches("pub ")
            .trim_start_matches("const ")
            .trim_start_matches("unsafe ");
        let Some(rest) = t.strip_prefix("fn ") else {
            continue;
        };
        let name: String = rest
            .chars()
            .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
            .collect();
        let mut depth = 0i64;
        let mut opened = false;
        for (j, l) in lines.iter().enumerate().skip(i) {
            let mut in_str = false;
            let mut prev = ' ';
            for c in code(l).chars() {
                match c {
                    '"' if prev != '\\' => in_str = !in_str,
                    '{' if !in_str => {
                        depth += 1;
                        opened = true;
                    }
                    '}' if !in_str => depth -= 1,
                    ';' if !in_str && !opened && depth == 0 => break,
                    _ => {}
                }
                prev = if prev == '\\' && c == '\\' { ' ' } else { c };
            }
            if opened && depth <= 0 {
                out.push((i + 1, name.clone(), j - i + 1));
                break;
            }
            if !opened && code(l).trim_end().ends_with(';') {
                break;
            }
        }
    }
    out
}

#[test]
fn no_function_is_over_the_limit() {
    let mut long = Vec::new();
    for (rel, text) in sources() {
        for (line, name, n) in functions(&text) {
            if n > MAX_FN_LINES {
                long.push(format!("src/{rel}:{line}: fn {name}: {n} lines"));
            }
        }
    }
    assert!(
        long.is_empty(),
        "functions over {MAX_FN_LINES} lines:\n{}",
        long.join("\n")
    );
}

#[test]
fn the_function_measure_counts_a_known_function() {
    let text = "fn short() {\n    let s = \"{\";\n}\n\npub fn three(x: u8) -> u8 {\n    match x {\n        0 => 1,\n        _ => 2,\n    }\n}\nfn decl();\n";
    let f = functions(text);
    assert_eq!(f.len(), 2, "{f:?}");
    assert_eq!((f[0].1.as_str(), f[0].2), ("short", 3));
    assert_eq!((f[1].1.as_str(), f[1].2), ("three", 6));
}

#[test]
fn the_library_uses_nothing_of_the_command_line() {
    for (rel, text) in sources() {
        if module_of(&rel) == "cli" {
            continue;
        }
        for (i, line) in text.lines().enumerate() {
            let c = code(line);
            for name in [
                "clap::",
                "indicatif::",
                "anyhow::",
                "use clap",
                "use indicatif",
                "use anyhow",
            ] {
                assert!(
                    !c.contains(name),
                    "src/{rel}:{}: the library uses {name}",
                    i + 1
                );
            }
        }
    }
    // And the manifest keeps those crates out of a library-only build.
    let manifest = std::fs::read_to_string(repo("Cargo.toml")).unwrap();
    for dep in ["clap", "indicatif", "anyhow"] {
        let line = manifest
            .lines()
            .find(|l| l.starts_with(&format!("{dep} =")))
            .unwrap_or_else(|| panic!("{dep} is not a dependency"));
        assert!(
            line.contains("optional = true"),
            "{dep} must be optional: {line}"
        );
        assert!(
            manifest.contains(&format!("\"dep:{dep}\"")),
            "{dep} must belong to the cli feature"
        );
    }
    assert!(
        !std::fs::read_to_string(repo("src/lib.rs"))
            .unwrap()
            .contains("mod cli"),
        "the library must not declare the cli module"
    );
}

#[test]
fn every_source_file_says_what_it_is_for() {
    let bare: Vec<String> = sources()
        .iter()
        .filter(|(_, text)| !text.trim_start().starts_with("//!"))
        .map(|(rel, _)| format!("src/{rel}"))
        .collect();
    assert!(
        bare.is_empty(),
        "files without a module doc (//!):\n{}",
        bare.join("\n")
    );
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
/// `src/` outside the binary (`src/cli/`, `main.rs`) spells out a flag.
#[test]
fn library_literals_name_no_flag() {
    let mut found = Vec::new();
    for (rel, text) in sources() {
        if module_of(&rel) == "cli" {
            continue;
        }
        for (line, literal) in message_literals(&text) {
            for flag in flags_in(&literal) {
                found.push(format!("src/{rel}:{line}: {flag}"));
            }
        }
    }
    assert!(
        found.is_empty(),
        "flags written as string literals (use pondus::support::flag::Flag):\n{}",
        found.join("\n")
    );
}
