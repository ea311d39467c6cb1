//! Benchmark of `pondus sites`: 10 million participant rows, four numeric
//! columns (site id, x, w, y), 1,000 sites. Prints the throughput of the
//! per-site pass beside a bare csv-crate pass (ByteRecord, no parsing) over
//! the same file, so the ratio to that limit is visible.
//!
//! Run: `cargo bench --bench sites` (release build). The file is generated
//! once under target/bench-sites/ (about 0.4 GB; never committed). Memory is
//! measured separately on the binary with /usr/bin/time -v, see
//! docs/performance.md.

use pondus::sites::{from_rows, RowInput, SitesSettings};
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};
use std::time::Instant;

const ROWS: u64 = 10_000_000;
const SITES: u64 = 1_000;

/// xorshift64* (Vigna 2016): a fixed-seed stream for the synthetic file.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
    }
}

fn generate(path: &Path) -> std::io::Result<()> {
    std::fs::create_dir_all(path.parent().expect("has a parent"))?;
    let tmp = path.with_extension("tmp");
    let mut w = BufWriter::with_capacity(1 << 20, std::fs::File::create(&tmp)?);
    writeln!(w, "site,x,w,y")?;
    let mut rng = Rng(0x9E37_79B9_7F4A_7C15);
    for i in 0..ROWS {
        let site = (i * 7919 + (i >> 10)) % SITES;
        let x = 10.0 * rng.next() + site as f64 * 0.01;
        let wv = 50.0 * rng.next();
        let y = 2.0 + 0.5 * x + 0.1 * wv + 0.01 * x * wv + rng.next() - 0.5;
        writeln!(w, "{site},{x:.4},{wv:.3},{y:.4}")?;
    }
    w.flush()?;
    drop(w);
    std::fs::rename(tmp, path)
}

fn bare_pass(path: &Path) -> u64 {
    let mut r = csv::ReaderBuilder::new()
        .buffer_capacity(1 << 16)
        .from_path(path)
        .expect("file opens");
    let mut rec = csv::ByteRecord::new();
    let mut n = 0;
    while r.read_byte_record(&mut rec).expect("valid CSV") {
        n += 1;
    }
    n
}

fn main() {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("target/bench-sites/raw.csv");
    if !path.exists() {
        let t = Instant::now();
        generate(&path).expect("benchmark file written");
        eprintln!(
            "generated {} in {:.1} s",
            path.display(),
            t.elapsed().as_secs_f64()
        );
    }
    let bytes = std::fs::metadata(&path).expect("file").len() as f64;
    // Warm the page cache so that both passes read from memory.
    let _ = bare_pass(&path);
    let t = Instant::now();
    let n = bare_pass(&path);
    let bare = t.elapsed().as_secs_f64();
    assert_eq!(n, ROWS);
    let settings = SitesSettings {
        site: "site".into(),
        x: "x".into(),
        y: "y".into(),
        w: Some("w".into()),
        covariates: vec![],
        robust: false,
        center_within: false,
        decimal: None,
        effect: Default::default(),
        treat: None,
        event: None,
    };
    let t = Instant::now();
    let report = from_rows("raw.csv", RowInput::File(&path), &settings).expect("runs");
    let ours = t.elapsed().as_secs_f64();
    assert_eq!(report.sites.len() as u64, SITES);
    let robust = SitesSettings {
        robust: true,
        ..settings
    };
    let t = Instant::now();
    let _ = from_rows("raw.csv", RowInput::File(&path), &robust).expect("runs");
    let hc3 = t.elapsed().as_secs_f64();
    let mb = bytes / 1e6;
    println!("file: {} rows, {SITES} sites, {mb:.0} MB", ROWS);
    println!(
        "bare csv ByteRecord pass:     {bare:6.2} s  {:6.1} M rows/s  {:6.0} MB/s",
        ROWS as f64 / bare / 1e6,
        mb / bare
    );
    println!(
        "pondus sites (x, w, x·w, y):  {ours:6.2} s  {:6.1} M rows/s  {:6.0} MB/s  ({:.2}× the bare pass)",
        ROWS as f64 / ours / 1e6,
        mb / ours,
        ours / bare
    );
    println!(
        "pondus sites --robust (HC3):  {hc3:6.2} s  {:6.1} M rows/s  (two passes)",
        ROWS as f64 / hc3 / 1e6
    );
}
