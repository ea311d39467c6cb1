//! Unit tests of the table reader (delimiters, quotes, encodings, blank rows).
use super::*;

fn req(h: &str, required: bool) -> ColumnRequest {
    ColumnRequest {
        header: h.into(),
        required,
        purpose: "test".into(),
        label: false,
        numbers: false,
        hint: String::new(),
    }
}

#[test]
fn delimiters_detected() {
    assert_eq!(detect_delimiter(b"a,b,c\n1,2,3"), b',');
    assert_eq!(detect_delimiter(b"a;b;c\n1,2;3"), b';');
    assert_eq!(detect_delimiter(b"a\tb\n"), b'\t');
    assert_eq!(detect_delimiter(b"\"x;y\",b\n"), b',');
    assert_eq!(detect_delimiter(b"single\n1\n"), b',');
}

#[test]
fn bom_quotes_unicode_and_semicolons() {
    let data = "\u{feff}study;r;n\n\"Lab Ø; Oslo\";0,3;50\nŁódź;0.2;40\n";
    let t = parse_table(
        "x.csv",
        data.as_bytes(),
        &[req("study", true), req("n", true)],
    )
    .unwrap();
    assert_eq!(t.delimiter, b';');
    let s = t.column(0).unwrap();
    assert_eq!(s.text(0), "Lab Ø; Oslo");
    assert_eq!(s.text(1), "Łódź");
    assert_eq!(t.column(1).unwrap().text(1), "40");
    assert_eq!(t.lines, vec![2, 3]);
}

#[test]
fn case_insensitive_and_optional() {
    let t = parse_table(
        "x",
        b"Study,R\na,0.1\n",
        &[req("study", true), req("se", false)],
    )
    .unwrap();
    assert_eq!(t.column(0).unwrap().text(0), "a");
    assert!(t.column(1).is_none());
}

#[test]
fn errors_are_clear() {
    let e = parse_table("f.csv", b"", &[]).unwrap_err().to_string();
    assert!(e.contains("empty"), "{e}");
    let e = parse_table("f.csv", b"a,b\n", &[]).unwrap_err().to_string();
    assert!(e.contains("no data rows"), "{e}");
    let e = parse_table("f.csv", b"a,b\n1,2\n3\n", &[])
        .unwrap_err()
        .to_string();
    assert!(e.contains("line 3 has 1 fields"), "{e}");
    let e = parse_table("f.csv", b"a,b\n1,2\n", &[req("r", true)])
        .unwrap_err()
        .to_string();
    assert!(e.contains("no column 'r'") && e.contains("a, b"), "{e}");
    let e = parse_table("f.csv", b"a,b\n\xff,2\n", &[req("a", true)])
        .unwrap_err()
        .to_string();
    assert!(e.contains("UTF-8"), "{e}");
    let e = parse_table("f.csv", b"a,a\n1,2\n", &[req("a", true)])
        .unwrap_err()
        .to_string();
    assert!(e.contains("unique"), "{e}");
}

#[test]
fn blank_rows_skipped_and_counted() {
    let t = parse_table("x", b"a,b\n1,2\n,\n\n3,4\n", &[req("a", true)]).unwrap();
    assert_eq!(t.len(), 2);
    assert_eq!(t.blank_rows, 1);
    assert_eq!(t.lines, vec![2, 5]);
}

#[test]
fn line_numbers_with_crlf_and_quoted_newlines() {
    let t = parse_table("x", b"a,b\r\n1,2\r\n\r\n3,4\r\n", &[req("a", true)]).unwrap();
    assert_eq!(t.lines, vec![2, 4]);
    let t = parse_table("x", b"a,b\n\"x\ny\",2\n3,4\n", &[req("a", true)]).unwrap();
    assert_eq!(t.lines, vec![2, 4]);
    assert_eq!(t.column(0).unwrap().text(0), "x\ny");
}

#[test]
fn line_numbers_with_lone_carriage_returns() {
    // Lines ended by a `\r` alone, with blank lines, and mixed with the
    // other two endings.
    let t = parse_table("x", b"a,b\r1,2\r\r\r3,4\r", &[req("a", true)]).unwrap();
    assert_eq!(t.lines, vec![2, 5]);
    let t = parse_table("x", b"a,b\r\n1,2\r3,4\n5,6\r\n\r7,8", &[req("a", true)]).unwrap();
    assert_eq!(t.lines, vec![2, 3, 4, 6]);
    assert_eq!(unclosed_quote(b"a,b\r1,2\r\n3,\"x\r"), Some(3));
}

#[test]
fn utf16_is_named_not_read_as_spaced_text() {
    let text = "study,effect\na,1\n";
    let le: Vec<u8> = text.encode_utf16().flat_map(|u| u.to_le_bytes()).collect();
    let with_bom = [&b"\xFF\xFE"[..], &le].concat();
    for bytes in [le, with_bom] {
        let e = parse_table("f.csv", &bytes, &[]).unwrap_err().to_string();
        assert!(e.contains("UTF-16") && e.contains("UTF-8"), "{e}");
    }
    assert!(!is_utf16(b"study,effect\na,1\n"));
}

#[test]
fn a_sep_line_names_the_delimiter_and_is_not_the_header() {
    let t = parse_table("x", b"sep=;\na;b\n1,5;2\n3;4\n", &[req("b", true)]).unwrap();
    assert_eq!(t.delimiter, b';');
    assert_eq!(t.headers, vec!["a", "b"]);
    assert_eq!(t.lines, vec![3, 4]);
    let t = parse_table("x", b"SEP=,\r\na,b\r\n1,2\r\n", &[req("a", true)]).unwrap();
    assert_eq!((t.delimiter, t.lines.clone()), (b',', vec![3]));
    // Lines ended by a lone carriage return (as old spreadsheet programs
    // write them): the sep line ends at the first one.
    let t = parse_table("x", b"sep=;\ra;b\r1,5;2\r3;4\r", &[req("b", true)]).unwrap();
    assert_eq!(
        (t.delimiter, t.headers.clone()),
        (b';', vec!["a".to_string(), "b".to_string()])
    );
    assert_eq!(t.column(0).map(|c| c.text(1)), Some("4".into()));
}

#[test]
fn an_unclosed_quote_is_named_with_its_line() {
    let e = parse_table("f.csv", b"a,b,c\n1,2,3\n\"x,2,3\n4,5,6\n", &[])
        .unwrap_err()
        .to_string();
    assert!(e.contains("line 3") && e.contains("never closed"), "{e}");
    assert!(!e.contains("unquoted"), "{e}");
    // Doubled quotes inside a quoted value are not an open quote.
    assert_eq!(unclosed_quote(b"a,b\n\"say \"\"hi\"\"\",2\n"), None);
}
