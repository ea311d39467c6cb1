//! A CSV file read in pieces ([`super::table_pieces`]) gives the table the
//! streamed reading gives: the same headers, cells, line numbers, blank-row
//! count and decimal mark, or the same error message, on seeded invented
//! files with every kind of oddity (invented data, for these tests only),
//! for pieces of 1 to 1000 bytes and 1, 2 or 4 threads.

use super::number::DecimalMark;
use super::{parse_table_file_in, parse_table_with, table_pieces, ColumnRequest, Table};
use std::io::Write;

use crate::support::rng::TestDraws as Rng;

/// A cell: numbers with the file's decimal mark `mark`, texts, blanks and
/// spaces (Unicode ones too, which the reader trims), now and then a quoted
/// value when `quotes`, rarely a byte that is not UTF-8, a stray quote or a
/// number with the other mark.
fn cell(r: &mut Rng, (mark, quotes): (char, bool), odd: u64) -> Vec<u8> {
    if quotes && r.chance(30) {
        return format!("\"{}\"\"{mark};\t\"", r.below(9)).into_bytes();
    }
    if r.chance(odd) {
        let odd_cells: [&[u8]; 8] = [
            b"\xff",
            b"a\xc3(",
            b"\"q\"",
            b"\"x\ny\"",
            b"x\"y",
            b"\"\"",
            b"2.5",
            b"1,234",
        ];
        return odd_cells[r.below(8) as usize].to_vec();
    }
    let text = match r.below(8) {
        0 => format!("{}", r.below(100)),
        1 => format!("-{}{mark}{:03}", r.below(50), r.below(1000)),
        2 => format!("{}{mark}{}", r.below(9), r.below(100)),
        3 => format!(" {} ", r.below(9)),
        4 => r
            .pick(&["\u{a0}7\u{3000}", "\u{b}8\u{c}", "9\u{85}"])
            .to_string(),
        5 => r.pick(&["", "NA", "Łódź", "Zürich", "a b"]).to_string(),
        6 => format!("{}e-{}", r.below(9) + 1, r.below(5)),
        _ => format!("s{}", r.below(1000)),
    };
    text.into_bytes()
}

/// An invented file of up to `rows` rows; `odd` sets how often a cell or
/// a line is unusual (per thousand). Returns the bytes and the number of
/// fields of the header.
fn invented(seed: u64, rows: usize, odd: u64) -> (Vec<u8>, usize) {
    let mut r = Rng(seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1);
    let delimiter = [',', ',', ';', '\t'][r.below(4) as usize];
    let d = delimiter;
    let ends = ["\n", "\n", "\r\n", "\r"];
    let mut end = ends[r.below(4) as usize];
    let mark = if d != ',' && r.chance(400) { ',' } else { '.' };
    let quotes = r.chance(100);
    let width = 1 + r.below(6) as usize;
    let mut s = Vec::new();
    if r.chance(150) {
        s.extend_from_slice(b"\xEF\xBB\xBF");
    }
    if r.chance(100) {
        write!(s, "sep={d}{end}").unwrap();
    } else if r.chance(60) {
        write!(s, "{end}{end}").unwrap();
    }
    let names: Vec<String> = (0..width).map(|i| format!(" h{i} ")).collect();
    let header = names.join(&d.to_string());
    if r.chance(40) {
        write!(s, "\"{}\"", header.trim()).unwrap();
    } else {
        s.extend_from_slice(header.as_bytes());
    }
    write!(s, "{end}").unwrap();
    for _ in 0..rows {
        if r.chance(20) {
            end = ends[r.below(4) as usize];
        }
        if r.chance(odd * 5 + 20) {
            let blank = r.pick(&["", " ", "  \t", "\u{a0}"]).to_string();
            let blank = if r.chance(300) {
                d.to_string().repeat(width - 1)
            } else {
                blank
            };
            write!(s, "{blank}{end}").unwrap();
            continue;
        }
        let mut n = width;
        if r.chance(odd / 2) {
            n = if r.chance(500) {
                width + 1
            } else {
                width.max(2) - 1
            };
        }
        for f in 0..n {
            if f > 0 {
                write!(s, "{d}").unwrap();
            }
            s.extend(cell(&mut r, (mark, quotes), odd));
        }
        write!(s, "{end}").unwrap();
    }
    if r.chance(300) && s.ends_with(end.as_bytes()) {
        s.truncate(s.len() - end.len());
    }
    match r.below(20) {
        // UTF-16, with or without its byte-order mark.
        0 => {
            let text = String::from_utf8_lossy(&s).into_owned();
            let units = text.encode_utf16().flat_map(|u| u.to_le_bytes());
            let mark: &[u8] = if r.chance(500) { b"\xFF\xFE" } else { b"" };
            s = mark.iter().copied().chain(units).collect();
        }
        // Nothing but blanks.
        1 => s = r.pick(&["", " \n\t", "\r\n\r\n ", "\u{feff}\n"]).into(),
        _ => {}
    }
    (s, width)
}

/// A few of the header's columns (some twice, some as labels), sometimes
/// one that is absent.
fn requests(r: &mut Rng, width: usize) -> Vec<ColumnRequest> {
    let mut out = Vec::new();
    for _ in 0..1 + r.below(4) {
        let header = if r.chance(100) {
            "absent".to_string()
        } else {
            format!("H{}", r.below(width as u64))
        };
        out.push(ColumnRequest {
            header,
            required: r.chance(300),
            purpose: "a test column".into(),
            hint: "Name it.".into(),
            label: r.chance(300),
            numbers: r.chance(2),
        });
    }
    out
}

/// Everything a table holds, or the error message.
type Outcome = std::result::Result<String, String>;

fn describe(t: crate::error::Result<Table>) -> Outcome {
    let t = t.map_err(|e| e.to_string())?;
    let columns: Vec<_> = t
        .columns
        .iter()
        .map(|c| {
            c.as_ref().map(|c| {
                // Each cell's text and number: a column read as numbers
                // gives back what the same column read as texts gives.
                let cells: Vec<_> = (0..t.lines.len())
                    .map(|i| (c.text(i).into_owned(), c.number(i)))
                    .collect();
                (&c.header, c.index, cells)
            })
        })
        .collect();
    Ok(format!(
        "{} {:?} {columns:?} {:?} {} {:?} {:?}",
        t.delimiter, t.headers, t.lines, t.blank_rows, t.decimal, t.sheet
    ))
}

fn pools() -> Vec<rayon::ThreadPool> {
    [1, 2, 4]
        .map(|n| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(n)
                .build()
                .unwrap()
        })
        .into()
}

#[test]
fn pieces_give_what_the_stream_gives() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("f.csv");
    let pools = pools();
    let (mut in_pieces, mut handed_back, mut refused) = (0, 0, 0);
    for seed in 1..=300u64 {
        let odd = [0, 0, 0, 1, 5, 20][(seed % 6) as usize];
        let (data, width) = invented(seed, (seed as usize * 7) % 90, odd);
        std::fs::write(&path, &data).unwrap();
        let mut r = Rng(seed);
        let mut requests = requests(&mut r, width);
        if data.contains(&0) {
            // UTF-16: with every column optional, a missing encoding check
            // would show as a table where the stream refuses the file.
            requests.iter_mut().for_each(|q| q.required = false);
        }
        let decimal = [
            None,
            None,
            Some(DecimalMark::Point),
            Some(DecimalMark::Comma),
        ][(seed % 4) as usize];
        let want = describe(parse_table_with("f.csv", &data, &requests, decimal));
        match (
            &want,
            table_pieces::read("f.csv", &path, &requests, decimal.is_none(), 64),
        ) {
            (Err(_), _) => refused += 1,
            (Ok(_), Some(_)) => in_pieces += 1,
            (Ok(_), None) => handed_back += 1,
        }
        for size in [1, 7, 64, 1000] {
            for pool in &pools {
                let got = pool.install(|| {
                    describe(parse_table_file_in(
                        "f.csv", &path, &requests, decimal, size,
                    ))
                });
                assert_eq!(
                    got,
                    want,
                    "seed {seed}, piece size {size}, {} threads:\n{}",
                    pool.current_num_threads(),
                    String::from_utf8_lossy(&data)
                );
            }
        }
    }
    // Every kind of outcome was compared.
    assert!(
        in_pieces > 60 && handed_back > 20 && refused > 40,
        "{in_pieces} read in pieces, {handed_back} handed to the stream, {refused} refused"
    );
}

/// The pieces of a file with no quote are read in pieces, not handed back:
/// the comparison above covers the pieces, not only the fallback.
#[test]
fn plain_files_are_read_in_pieces() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("f.csv");
    let pools = pools();
    for seed in [11u64, 12, 13, 14] {
        let mut data = b"h0,h1,h2\r\n".to_vec();
        for i in 0..3000 {
            if i % 97 == 0 {
                data.extend_from_slice(b" ,\t,\r\n\n");
            }
            writeln!(data, "s{i}, {} ,{}.{}", i % 7, seed, i).unwrap();
        }
        std::fs::write(&path, &data).unwrap();
        let mut r = Rng(seed);
        let requests = requests(&mut r, 3);
        let want = describe(parse_table_with("f.csv", &data, &requests, None));
        assert!(want.is_ok(), "{want:?}");
        for pool in &pools {
            let cells = pool.install(|| table_pieces::read("f.csv", &path, &requests, true, 997));
            assert!(cells.is_some());
            let got = pool
                .install(|| describe(parse_table_file_in("f.csv", &path, &requests, None, 997)));
            assert_eq!(got, want);
        }
    }
}

/// Files the first pass of the stream refuses whose rows the pieces could
/// read: UTF-16 text (whose every other byte is NUL) and a file of blanks.
/// They are handed to the stream, which names the problem.
#[test]
fn utf16_and_blank_files_are_left_to_the_stream() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("f.csv");
    let optional = |h: &str| ColumnRequest {
        header: h.into(),
        required: false,
        purpose: "a test column".into(),
        hint: "Name it.".into(),
        label: false,
        numbers: false,
    };
    let utf16: Vec<u8> = "a,b\n1,2\n3,4"
        .encode_utf16()
        .flat_map(u16::to_le_bytes)
        .collect();
    let cases: [(&[u8], &str); 3] = [
        (&utf16, "UTF-16"),
        (b" \n\t\n", "empty"),
        (b"h0,h1\n1,2\n", ""),
    ];
    for (data, why) in cases {
        std::fs::write(&path, data).unwrap();
        let requests = [optional("a"), optional("h0")];
        let want = describe(parse_table_with("f.csv", data, &requests, None));
        let got = describe(parse_table_file_in("f.csv", &path, &requests, None, 3));
        assert_eq!(got, want);
        let in_pieces = table_pieces::read("f.csv", &path, &requests, true, 3);
        if why.is_empty() {
            assert!(got.is_ok() && in_pieces.is_some());
        } else {
            assert!(got.unwrap_err().contains(why));
            assert!(in_pieces.is_none());
        }
    }
}

/// The shortcut trim is `str::trim`, for every character up to U+3100
/// alone, before and after a letter, and on both sides.
#[test]
fn the_shortcut_trim_is_str_trim() {
    for c in ('\0'..='\u{3100}').chain(['\u{feff}', '\u{10ffff}']) {
        for s in [
            format!("{c}"),
            format!("{c}a"),
            format!("a{c}"),
            format!("{c}a{c}"),
            format!("{c}{c}"),
        ] {
            assert_eq!(table_pieces::trim(&s), s.trim(), "{:?}", s);
        }
    }
    assert_eq!(table_pieces::trim(""), "");
}

/// Numbers read from the bytes while a row is split keep, when they are not
/// written in their shortest form (a trailing zero, a leading zero, −0.0),
/// their text beside their value: every cell gives back its text as
/// written and the number `str::parse` gives, in pieces of any size.
#[test]
fn short_numbers_not_in_their_shortest_form_keep_their_text() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("f.csv");
    let cells = [
        "1.50", "-0.0", "007", "2.5", "-12.050", "0", "10", "0.000", "3.1416",
    ];
    let mut data = b"study,x\n".to_vec();
    for (i, c) in cells.iter().cycle().take(90).enumerate() {
        writeln!(data, "s{i},{c}").unwrap();
    }
    std::fs::write(&path, &data).unwrap();
    let requests = [ColumnRequest {
        header: "x".into(),
        required: true,
        purpose: "a test column".into(),
        hint: "Name it.".into(),
        label: false,
        numbers: true,
    }];
    for size in [1, 16, 64, 4096] {
        assert!(table_pieces::read("f.csv", &path, &requests, true, size).is_some());
        let t = parse_table_file_in("f.csv", &path, &requests, None, size).unwrap();
        let x = t.columns[0].as_ref().unwrap();
        for (i, want) in cells.iter().cycle().take(90).enumerate() {
            assert_eq!(x.text(i), *want, "row {i}, pieces of {size} bytes");
            let n = want.parse::<f64>().unwrap();
            assert!(
                matches!(x.number(i), super::number::Cell::Value(v) if v.to_bits() == n.to_bits()),
                "row {i}: {:?} against {n}",
                x.number(i)
            );
        }
    }
}
