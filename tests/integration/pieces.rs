//! The table of a CSV file read in pieces on all threads (issue 20) is the
//! streamed reading's: the same report and the same messages through the
//! command line, on a file of more than two 1 MiB pieces.

use assert_cmd::Command;

/// Invented rows (for this test only): `n` studies over more than one
/// 1 MiB piece, with CRLF line ends, a blank line now and then and no line
/// break after the last row.
fn invented_large_csv(n: usize) -> String {
    let mut s = String::from("study,effect,variance,m\r\n");
    for i in 0..n {
        if i % 997 == 0 {
            s.push_str(" , ,,\r\n");
        }
        let x = (i as f64 * 0.37).sin();
        s.push_str(&format!(
            "study number {i:06} of an invented set,{:.6},{:.6},{:.4}\r\n",
            0.2 + 0.1 * x + 0.05 * (i as f64 * 1.3).cos(),
            0.01 + 0.005 * (1.0 + x),
            x
        ));
    }
    s.truncate(s.len() - 2);
    s
}

/// `pondus fit` on the file `csv` (read in pieces on all threads when it
/// holds no quote) and on the same bytes from standard input (read as a
/// stream): the JSON without the file's name, or the message with the
/// file's name as standard input's.
fn fit_json_both_ways(csv: &[u8]) -> [Result<serde_json::Value, String>; 2] {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("data.csv");
    std::fs::write(&path, csv).unwrap();
    let run = |input: &str, out: &str| {
        let out = dir.path().join(out);
        let o = Command::cargo_bin("pondus")
            .unwrap()
            .arg("fit")
            .arg(input)
            .args(["--moderator", "m", "--quiet", "--json"])
            .arg(&out)
            .write_stdin(csv.to_vec())
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&o.stderr).replace(path.to_str().unwrap(), "<stdin>");
        if !o.status.success() {
            return Err(stderr);
        }
        let mut v: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out).unwrap()).unwrap();
        v["input"]["file"] = serde_json::Value::Null;
        Ok(v)
    };
    [
        run(path.to_str().unwrap(), "file.json"),
        run("-", "stdin.json"),
    ]
}

/// Where study `i`'s row starts in a file of [`invented_large_csv`].
fn row_start(csv: &[u8], i: usize) -> usize {
    let label = format!("study number {i:06} of an invented set,");
    csv.windows(label.len())
        .position(|w| w == label.as_bytes())
        .unwrap()
}

/// The file line (1-based) of the byte at `at`.
fn line_of(bytes: &[u8], at: usize) -> usize {
    1 + bytes[..at].iter().filter(|&&b| b == b'\n').count()
}

/// Issue 20: a CSV file without quotes is read in pieces on all threads;
/// its report, and its messages for a ragged row or a label that is not
/// UTF-8 far into the file, are those of the streamed reading.
#[test]
fn issue_20_a_file_read_in_pieces_reports_as_the_stream() {
    let csv = invented_large_csv(40_000).into_bytes();
    assert!(csv.len() > 2 << 20, "more than two pieces");
    let [file, stdin] = fit_json_both_ways(&csv);
    let file = file.unwrap();
    assert_eq!(file["input"]["rows"], 40_000);
    assert_eq!(Ok(file), stdin);
    let row = |i: usize| row_start(&csv, i);
    // A delimiter lost far into the file.
    let mut ragged = csv.clone();
    let at = row(25_003) + 38;
    assert_eq!(ragged[at], b',');
    ragged[at] = b';';
    let [file, stdin] = fit_json_both_ways(&ragged);
    let message = file.unwrap_err();
    let want = format!(
        "line {} has 3 fields but the header has 4",
        line_of(&csv, at)
    );
    assert!(message.contains(&want), "{message}");
    assert_eq!(Err(message), stdin);
    // A label byte that is not UTF-8, later still.
    let mut bad = csv.clone();
    let at = row(38_000) + 4;
    bad[at] = 0xff;
    let [file, stdin] = fit_json_both_ways(&bad);
    let message = file.unwrap_err();
    let want = format!(
        "line {}, column 'study' is not valid UTF-8",
        line_of(&csv, at)
    );
    assert!(message.contains(&want), "{message}");
    assert_eq!(Err(message), stdin);
}

/// Lines ended by a lone carriage return (the old Mac OS convention) or by
/// `\n` alone are numbered as those ended by `\r\n`, in pieces and as a
/// stream: a ragged row far into the file is named on the same line in all.
#[test]
fn lines_ended_by_a_lone_carriage_return_are_numbered() {
    let csv = invented_large_csv(40_000).into_bytes();
    let at = row_start(&csv, 30_011) + 38;
    let mut ragged = csv.clone();
    assert_eq!(ragged[at], b',');
    ragged[at] = b';';
    let want = format!(
        "line {} has 3 fields but the header has 4",
        line_of(&csv, at)
    );
    // The file's `\r\n` made `\r` (or `\n`) alone.
    let without = |bytes: &[u8], dropped: u8| -> Vec<u8> {
        bytes.iter().copied().filter(|&b| b != dropped).collect()
    };
    for bytes in [without(&ragged, b'\n'), without(&ragged, b'\r')] {
        let [file, stdin] = fit_json_both_ways(&bytes);
        let message = file.unwrap_err();
        assert!(message.contains(&want), "{message}");
        assert_eq!(Err(message), stdin);
    }
    // The file without the ragged row, its lines ended by `\r` alone, gives
    // the report of the `\r\n` file (but for the file's hash).
    let unhashed = |r: Result<serde_json::Value, String>| {
        r.map(|mut v| {
            v["input"]["sha256"] = serde_json::Value::Null;
            v
        })
    };
    let [file, stdin] = fit_json_both_ways(&without(&csv, b'\n')).map(unhashed);
    let [crlf, _] = fit_json_both_ways(&csv).map(unhashed);
    assert_eq!(file, crlf);
    assert_eq!(file, stdin);
}

/// Issue 20: the numeric columns of a file read in pieces are parsed
/// straight from the bytes, yet every cell written another way than its
/// number's shortest form (trailing zeros, an exponent, a plus sign,
/// blanks around it, a missing mark) reads and reports as in the streamed
/// reading, and a message about a cell quotes the cell as written.
#[test]
fn issue_20_numbers_read_from_the_bytes_keep_their_cells_as_written() {
    let csv = invented_large_csv(40_000).into_bytes();
    let odd = |cells: &[(usize, usize, &str)]| {
        let text = String::from_utf8(csv.clone()).unwrap();
        let mut lines: Vec<String> = text.split("\r\n").map(str::to_string).collect();
        for &(i, field, cell) in cells {
            let at = lines
                .iter()
                .position(|l| l.starts_with(&format!("study number {i:06} ")))
                .unwrap();
            let mut fields: Vec<&str> = lines[at].split(',').collect();
            fields[field] = cell;
            lines[at] = fields.join(",");
        }
        lines.join("\r\n").into_bytes()
    };
    let written = odd(&[
        (30_001, 1, "0.2500"),
        (30_002, 2, "1.00e-2"),
        (30_003, 3, "+0.5"),
        (30_004, 3, " 0.125 "),
        (30_005, 3, "NA"),
        (30_006, 1, "-0.0"),
        (30_007, 3, "2."),
        (30_008, 3, ".75"),
    ]);
    let [file, stdin] = fit_json_both_ways(&written);
    let file = file.unwrap();
    // The missing moderator value leaves one study out.
    assert_eq!(file["studies"].as_array().unwrap().len(), 39_999);
    assert_eq!(Ok(file), stdin);
    // A moderator cell that is not a number, quoted as written.
    let [file, stdin] = fit_json_both_ways(&odd(&[(35_000, 3, "0.5O")]));
    let message = file.unwrap_err();
    assert!(message.contains("('0.5O')"), "{message}");
    assert_eq!(Err(message), stdin);
    // A variance of zero written with trailing zeros, quoted as written.
    let [file, stdin] = fit_json_both_ways(&odd(&[(36_000, 2, "0.000")]));
    let message = file.unwrap_err();
    assert!(message.contains("0.000"), "{message}");
    assert_eq!(Err(message), stdin);
}
