//! Plain decimal numbers read straight from a cell's bytes, bit for bit as
//! Rust's `str::parse::<f64>` reads them.
//!
//! A participant-row file (`pondus sites`) and the numeric columns of a
//! large study table (`pondus fit`, [`super::column::NumberCells`]) hold
//! millions of short numbers (`12.375`, `-0.5`, `3e-4`); reading them is
//! much of the work. [`parse`] accepts only the plain form
//! `[+-]digits[.digits][(e|E)[+-]digits]` and declines anything else
//! (blanks, missing marks, text, `.5`, `inf`), which then goes the general
//! way (`str::parse` after trimming and the missing marks), so the set of
//! cells read here never differs from what the general way would read as
//! the same number.

/// 10⁰ … 10²²: every power of ten that a double holds exactly
/// (10²² = 2²² · 5²², and 5²² < 2⁵³).
const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// Reads digits from `cell[*i..]` into the decimal mantissa `m` (the first
/// 19 significant ones: `significant` counts them all); returns how many
/// digits were read.
#[inline]
fn digits(cell: &[u8], i: &mut usize, m: &mut u64, significant: &mut u32) -> usize {
    let start = *i;
    while let Some(&b) = cell.get(*i) {
        let d = b.wrapping_sub(b'0');
        if d > 9 {
            break;
        }
        if *m != 0 || d != 0 {
            *significant += 1;
            if *significant <= 19 {
                *m = *m * 10 + u64::from(d);
            }
        }
        *i += 1;
    }
    *i - start
}

/// A plain decimal number as a finite double; None for anything else.
///
/// # Formula
/// With the digits read as an integer m and the power of ten e (exponent
/// minus the digits after the point): when m ≤ 2⁵³ and |e| ≤ 22, both m and
/// 10^|e| are doubles exactly, so one IEEE multiplication (e ≥ 0) or division
/// (e < 0) rounds m·10^e correctly (Clinger 1990, "How to read floating point
/// numbers accurately", PLDI '90, the fast path of §5). Other plain numbers
/// (more than 15–16 significant digits, large exponents) go to
/// `str::parse::<f64>`, itself correctly rounded, and a result that is not
/// finite is declined. Either way the double is the one `str::parse` returns.
///
/// # Examples
/// ```text
/// parse(b"-12.5")   == Some(-12.5)
/// parse(b"3e-4")    == Some(3e-4)
/// parse(b" 1")      == None   (blank: the general reader trims)
/// parse(b"NA")      == None
/// ```
#[inline]
pub(crate) fn parse(cell: &[u8]) -> Option<f64> {
    match parse_prefix(cell) {
        Some((v, n)) if n == cell.len() => Some(v),
        _ => None,
    }
}

/// The plain number at the start of `bytes` ([`parse`]) and its length in
/// bytes; the byte after it, if any, is not part of a plain number (the
/// caller checks that it ends the cell).
///
/// The common short form (`[-]ddd[.ddd]`, at most 7 digits on either side of
/// the point, no exponent) is read eight bytes at a time ([`short`]); any
/// other goes digit by digit ([`long`]). Both give the same result.
#[inline(always)]
pub(crate) fn parse_prefix(bytes: &[u8]) -> Option<(f64, usize)> {
    short(bytes).or_else(|| long(bytes))
}

/// Eight bytes from `bytes[i..]` as a little-endian number, zero bytes past
/// the end.
#[inline(always)]
fn load8(bytes: &[u8], i: usize) -> u64 {
    match bytes.get(i..i + 8) {
        Some(b) => u64::from_le_bytes([b[0], b[1], b[2], b[3], b[4], b[5], b[6], b[7]]),
        None => {
            let mut b = [0u8; 8];
            let rest = bytes.get(i..).unwrap_or(&[]);
            b[..rest.len()].copy_from_slice(rest);
            u64::from_le_bytes(b)
        }
    }
}

/// The number of leading ASCII digits in the eight bytes of `v` (first byte
/// lowest), and the bytes minus `'0'` (valid for those digits).
///
/// # Formula
/// Per byte x: x − 0x30 has its top bit set when x < `'0'`, x + 0x46 when
/// x > `'9'`, and x itself when x ≥ 0x80. A borrow or carry crosses into a
/// byte only from a byte below it, and every byte below the first non-digit
/// is a digit (no borrow, no carry), so the lowest flagged byte is the first
/// non-digit (the SWAR digit test of Lemire's fast_float and simdjson).
#[inline(always)]
fn leading_digits(v: u64) -> (u32, u64) {
    const ONES: u64 = 0x0101_0101_0101_0101;
    let a = v.wrapping_sub(0x30 * ONES);
    let b = v.wrapping_add(0x46 * ONES);
    let flags = (a | b | v) & (0x80 * ONES);
    (flags.trailing_zeros() / 8, a)
}

/// The value of the first `n` (1 to 7) digits of `a` (digit values, first
/// digit in the lowest byte).
///
/// # Formula
/// The n digits are moved to the top bytes (zeros before them) and the eight
/// digits combined in three multiplications: pairs (×10), quadruples (×100)
/// and the two halves (×10⁴) (Lemire's fast_float, `parse_eight_digits_unrolled`).
#[inline(always)]
fn digits_value(a: u64, n: u32) -> u64 {
    const MASK: u64 = 0x0000_00FF_0000_00FF;
    const MUL1: u64 = 100 + (1_000_000 << 32);
    const MUL2: u64 = 1 + (10_000 << 32);
    let v = a << (8 * (8 - n));
    let v = v.wrapping_mul(10).wrapping_add(v >> 8);
    (v & MASK)
        .wrapping_mul(MUL1)
        .wrapping_add(((v >> 16) & MASK).wrapping_mul(MUL2))
        >> 32
}

/// [`parse_prefix`] for `[-]ddd[.ddd]` with 1–7 digits before the point and
/// 1–7 after it (if there is a point), followed by anything but a digit, a
/// point or an exponent; None for any other form.
///
/// # Formula
/// m = integer digits · 10^f + fraction digits (< 10¹⁴ < 2⁵³) and the value
/// m / 10^f, one correctly rounded division of two exact doubles (the fast
/// path of [`long`]).
#[inline(always)]
fn short(bytes: &[u8]) -> Option<(f64, usize)> {
    short_with_form(bytes).map(|(v, i, _)| (v, i))
}

/// [`short`]'s number, its length, and whether it is written in its
/// shortest form: no leading zero before the point (but a lone `0`), no
/// trailing zero after it. With at most 14 digits, no `+` and no exponent,
/// that is the text Rust's `Display` writes for the number (see
/// `super::column`'s `is_shortest_form`, which says why). A cell of this
/// form that is not its number's shortest (`1.6430`, `-0.0`, `007`) still
/// has its value here, correctly rounded as [`parse`] gives it; only its
/// text must be kept beside it.
#[inline(always)]
pub(crate) fn short_with_form(bytes: &[u8]) -> Option<(f64, usize, bool)> {
    let negative = bytes.first() == Some(&b'-');
    let mut i = usize::from(negative);
    let (n, a) = leading_digits(load8(bytes, i));
    if !(1..8).contains(&n) {
        return None;
    }
    let mut m = digits_value(a, n);
    let mut shortest = n == 1 || bytes[i] != b'0';
    i += n as usize;
    let mut scale = 0;
    if bytes.get(i) == Some(&b'.') {
        let (f, a) = leading_digits(load8(bytes, i + 1));
        if !(1..8).contains(&f) {
            return None;
        }
        m = m * POW10_INT[f as usize] + digits_value(a, f);
        scale = f as usize;
        i += 1 + f as usize;
        shortest &= bytes[i - 1] != b'0';
    }
    if bytes.get(i).is_some_and(|&b| b | 0x20 == b'e' || b == b'.') {
        return None;
    }
    // m < 10¹⁴: the signed conversion is exact and one instruction.
    let v = m as i64 as f64 / POW10[scale];
    Some((if negative { -v } else { v }, i, shortest))
}

/// 10⁰ … 10⁷ as integers.
const POW10_INT: [u64; 8] = [1, 10, 100, 1_000, 10_000, 100_000, 1_000_000, 10_000_000];

/// [`parse_prefix`] digit by digit, for every plain form.
#[cold]
#[inline(never)]
fn long(bytes: &[u8]) -> Option<(f64, usize)> {
    let cell = bytes;
    let mut i = 0;
    let negative = match cell.first()? {
        b'-' => {
            i = 1;
            true
        }
        b'+' => {
            i = 1;
            false
        }
        _ => false,
    };
    let (mut m, mut significant) = (0u64, 0u32);
    if digits(cell, &mut i, &mut m, &mut significant) == 0 {
        return None;
    }
    let mut scale: i64 = 0;
    if cell.get(i) == Some(&b'.') {
        i += 1;
        let n = digits(cell, &mut i, &mut m, &mut significant);
        if n == 0 {
            return None;
        }
        scale = -(n as i64);
    }
    if cell.get(i).is_some_and(|&b| b | 0x20 == b'e') {
        i += 1;
        let exp_negative = match cell.get(i) {
            Some(b'-') => {
                i += 1;
                true
            }
            Some(b'+') => {
                i += 1;
                false
            }
            _ => false,
        };
        let start = i;
        let mut e: i64 = 0;
        while let Some(&b) = cell.get(i) {
            let d = b.wrapping_sub(b'0');
            if d > 9 {
                break;
            }
            e = (e * 10 + i64::from(d)).min(1 << 40);
            i += 1;
        }
        if i == start {
            return None;
        }
        scale += if exp_negative { -e } else { e };
    }
    if significant <= 19 && m <= 1 << 53 && (-22..=22).contains(&scale) {
        let v = m as i64 as f64; // m ≤ 2⁵³: exact
        let v = if scale < 0 {
            v / POW10[(-scale) as usize]
        } else {
            v * POW10[scale as usize]
        };
        return Some((if negative { -v } else { v }, i));
    }
    // The number is ASCII (checked above), so always UTF-8.
    let v: f64 = std::str::from_utf8(&cell[..i]).ok()?.parse().ok()?;
    v.is_finite().then_some((v, i))
}

#[cfg(test)]
mod tests {
    use super::parse;

    /// The reference: Rust's own parser, finite values only.
    fn std_reading(t: &str) -> Option<f64> {
        t.parse::<f64>().ok().filter(|v| v.is_finite())
    }

    use crate::support::rng::TestDraws as Rng;

    #[test]
    fn plain_numbers_read_bit_for_bit_as_std_reads_them() {
        let edge = [
            "0",
            "-0",
            "+0",
            "0.0",
            "-0.0",
            "1",
            "-1",
            "12.5",
            "007",
            "1e5",
            "1E-5",
            "1e+5",
            "9007199254740992",
            "9007199254740993",
            "9007199254740993e-3",
            "123456789012345678",
            "1234567890123456789012",
            "0.1",
            "0.3",
            "2.2250738585072014e-308",
            "1e22",
            "1e23",
            "1e-22",
            "1e-23",
            "4.9e-324",
            "1.7976931348623157e308",
            "0.000000000000000000000001",
            "3.14159265358979323846264338327950288",
            "1e-400",
            "100000000000000000000000e-2",
            "0.00000000000000000000000000000000000000000000000000001e60",
            "123.456e-300",
        ];
        for t in edge {
            let got = parse(t.as_bytes());
            assert!(got.is_some(), "{t}");
            assert_eq!(
                got.map(f64::to_bits),
                std_reading(t).map(f64::to_bits),
                "{t}"
            );
        }
        // A seeded stream of plain numbers: 1–22 digits, the point anywhere,
        // exponents from −40 to 40 on a third of them.
        let mut r = Rng(0x9E37_79B9_7F4A_7C15);
        for _ in 0..200_000 {
            let n = 1 + r.below(22) as usize;
            let mut t = String::new();
            match r.below(4) {
                0 => t.push('-'),
                1 if r.below(4) == 0 => t.push('+'),
                _ => {}
            }
            let point = r.below(n as u64 + 1) as usize;
            for i in 0..n {
                if i == point && i > 0 {
                    t.push('.');
                }
                t.push(char::from(b'0' + r.below(10) as u8));
            }
            if r.below(3) == 0 {
                t.push(if r.below(2) == 0 { 'e' } else { 'E' });
                let e = r.below(81) as i64 - 40;
                t.push_str(&e.to_string());
            }
            let got = parse(t.as_bytes());
            assert!(got.is_some(), "{t}");
            assert_eq!(
                got.map(f64::to_bits),
                std_reading(&t).map(f64::to_bits),
                "{t}"
            );
        }
    }

    #[test]
    fn a_number_is_read_up_to_the_end_of_its_cell() {
        for (t, v, n) in [
            ("12.5,3", 12.5, 4),
            ("-7;x", -7.0, 2),
            ("0.1234567\n", 0.1234567, 9),
            ("12345678.5,", 12345678.5, 10),
            ("1.5e3,", 1500.0, 5),
            ("3 ", 3.0, 1),
            ("4.25.1", 4.25, 4),
        ] {
            assert_eq!(super::parse_prefix(t.as_bytes()), Some((v, n)), "{t}");
        }
        // The eight-byte path and the digit-by-digit path agree wherever the
        // first one reads.
        let mut r = Rng(7);
        let alphabet = b"0123456789.-e,";
        for _ in 0..200_000 {
            let len = 1 + r.below(18) as usize;
            let bytes: Vec<u8> = (0..len)
                .map(|_| alphabet[r.below(alphabet.len() as u64) as usize])
                .collect();
            if let Some(got) = super::short(&bytes) {
                assert_eq!(Some(got), super::long(&bytes), "{bytes:?}");
            }
        }
    }

    #[test]
    fn anything_else_is_declined_or_read_as_std_reads_it() {
        for t in [
            "", " 1", "1 ", "+", "-", ".", ".5", "5.", "1e", "1e+", "e5", "1.2.3", "1,5", "NA",
            "inf", "-inf", "nan", "infinity", "0x10", "1_000", "1e400", "--1", "1d5", "+-1",
        ] {
            assert_eq!(parse(t.as_bytes()), None, "{t}");
        }
        // Random short strings over the bytes of numbers and a few others:
        // whatever is read must be what str::parse reads.
        let alphabet = b"0123456789.+-eE ,xn";
        let mut r = Rng(42);
        for _ in 0..200_000 {
            let len = r.below(9) as usize;
            let bytes: Vec<u8> = (0..len)
                .map(|_| alphabet[r.below(alphabet.len() as u64) as usize])
                .collect();
            if let Some(v) = parse(&bytes) {
                let text = std::str::from_utf8(&bytes).unwrap();
                assert_eq!(
                    Some(v.to_bits()),
                    std_reading(text).map(f64::to_bits),
                    "{text}"
                );
            }
        }
    }
}
