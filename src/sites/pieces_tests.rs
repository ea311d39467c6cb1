//! The file read in pieces gives what the streamed pass gives: the same
//! rows in the same order with the same values, the same counts and line
//! numbers, and the same error message, on seeded invented files with every
//! kind of oddity, for piece sizes from 1 byte up and 1, 2 or 4 threads.

use super::pieces::for_each_piece_of;
use super::read::{self, PassSummary, RowColumns, RowSink};
use crate::input::number::DecimalMark;
use crate::support::flag::Flag;
use std::io::Write;

/// Every usable row: site id and the bits of its values.
#[derive(Default, Debug, PartialEq)]
struct Rows(Vec<(Vec<u8>, Vec<u64>)>);

impl RowSink for Rows {
    fn row(&mut self, id: &[u8], values: &[f64]) {
        self.0
            .push((id.to_vec(), values.iter().map(|v| v.to_bits()).collect()));
    }
}

use crate::support::rng::TestDraws as Rng;

/// A cell of a numeric column: mostly plain numbers, sometimes one of the
/// forms the general reader handles (blank, missing mark, spaces, `.5`,
/// long digit strings), rarely text; `odd` in 1/1000 per cell.
fn number(r: &mut Rng, odd: u64) -> String {
    if r.chance(odd) {
        let forms = [
            "", "NA", " 2.5 ", ".5", "5.", "abc", "inf", "1e400", "-", "n/a", "1,5", "+3",
        ];
        return forms[r.below(forms.len() as u64) as usize].to_string();
    }
    match r.below(4) {
        0 => format!("{}", r.below(100)),
        1 => format!("-{}.{:03}", r.below(50), r.below(1000)),
        2 => format!("{}.{}e-{}", r.below(9) + 1, r.below(1000), r.below(5)),
        _ => format!("{}.{:016}", r.below(1000), r.below(u64::MAX >> 20)),
    }
}

/// An invented file with `rows` rows; `odd` sets how often a cell or a line
/// is unusual (per thousand).
fn invented(seed: u64, rows: usize, odd: u64) -> (Vec<u8>, u8) {
    let mut r = Rng(seed);
    let delimiter = [b',', b',', b',', b';', b'\t'][r.below(5) as usize];
    let d = delimiter as char;
    let end = ["\n", "\n", "\r\n", "\r"][r.below(4) as usize];
    let mut s = Vec::new();
    if r.chance(100) {
        s.extend_from_slice(b"\xEF\xBB\xBF");
    }
    if r.chance(100) {
        write!(s, "sep={d}{end}").unwrap();
    }
    if r.chance(100) {
        write!(s, "\"site\"{d}x{d}note{d}w{d}y{end}").unwrap();
    } else {
        write!(s, "site{d}x{d}note{d}w{d}y{end}").unwrap();
    }
    let sites = ["a", "b", " c ", "Zürich", "site-4", "e"];
    for _ in 0..rows {
        if r.chance(odd * 3) {
            let lines = ["", " ", "  \t", &format!("{d}{d}{d}{d}"), "a,1"];
            let l = lines[r.below(lines.len() as u64) as usize];
            write!(s, "{l}{end}").unwrap();
            continue;
        }
        let site = if r.chance(odd) {
            ["", "\"quoted, site\"", "\"two\nlines\""][r.below(3) as usize]
        } else {
            sites[r.below(sites.len() as u64) as usize]
        };
        let (x, w, y) = (
            number(&mut r, odd),
            number(&mut r, odd),
            number(&mut r, odd),
        );
        let note = if r.chance(odd) { "x\"y" } else { "ok" };
        write!(s, "{site}{d}{x}{d}{note}{d}{w}{d}{y}{end}").unwrap();
    }
    if r.chance(300) {
        s.truncate(s.len() - end.len());
    }
    (s, delimiter)
}

fn columns(decimal: Option<DecimalMark>, advice: bool) -> RowColumns {
    RowColumns {
        site: "site".into(),
        numeric: vec![
            ("x".into(), Flag::X),
            ("w".into(), Flag::W),
            ("y".into(), Flag::Y),
        ],
        decimal,
        coded: vec![],
        text_x_advice: advice,
    }
}

type Outcome = Result<(String, Rows), String>;

fn streamed(data: &[u8], cols: &RowColumns) -> Outcome {
    let mut rows = Rows::default();
    read::for_each_row("f.csv", data, cols, |_, id, v| {
        rows.row(id, v);
        Ok(())
    })
    .map(|s| (format!("{s:?}"), rows))
    .map_err(|e| e.to_string())
}

fn in_pieces(path: &std::path::Path, cols: &RowColumns, size: u64) -> Outcome {
    let file = std::fs::File::open(path).unwrap();
    let mut all = Rows::default();
    let summary: crate::error::Result<PassSummary> =
        for_each_piece_of("f.csv", (file, size), cols, Rows::default, |p| {
            all.0.extend(p.0)
        });
    summary
        .map(|s| (format!("{s:?}"), all))
        .map_err(|e| e.to_string())
}

fn with_threads<T: Send>(n: usize, f: impl FnOnce() -> T + Send) -> T {
    rayon::ThreadPoolBuilder::new()
        .num_threads(n)
        .build()
        .unwrap()
        .install(f)
}

#[test]
fn pieces_give_what_the_stream_gives() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("f.csv");
    let (mut ok, mut failed) = (0, 0);
    for seed in 1..=240u64 {
        let odd = [0, 0, 1, 3, 10, 40][(seed % 6) as usize];
        let (data, _) = invented(seed, 5 + (seed as usize * 7) % 120, odd);
        std::fs::write(&path, &data).unwrap();
        let decimal = [
            None,
            None,
            Some(DecimalMark::Point),
            Some(DecimalMark::Comma),
        ][(seed % 4) as usize];
        let cols = columns(decimal, seed % 3 == 0);
        let want = streamed(&data, &cols);
        match &want {
            Ok(_) => ok += 1,
            Err(_) => failed += 1,
        }
        for size in [1, 2, 3, 5, 8, 13, 31, 64, 200, 1 << 20] {
            let got = with_threads(2, || in_pieces(&path, &cols, size));
            assert_eq!(
                got,
                want,
                "seed {seed}, piece size {size}:\n{}",
                String::from_utf8_lossy(&data)
            );
        }
    }
    // Both kinds of outcome were compared.
    assert!(ok > 40 && failed > 40, "{ok} read, {failed} refused");
}

#[test]
fn the_result_does_not_depend_on_the_threads() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("f.csv");
    for seed in [3u64, 4, 5, 9] {
        let (data, _) = invented(seed, 3000, if seed == 9 { 2 } else { 0 });
        std::fs::write(&path, &data).unwrap();
        let cols = columns(None, false);
        let one = with_threads(1, || in_pieces(&path, &cols, 997));
        for n in [2, 4] {
            assert_eq!(with_threads(n, || in_pieces(&path, &cols, 997)), one);
        }
        assert_eq!(one, streamed(&data, &cols));
    }
}
