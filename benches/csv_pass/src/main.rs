//! Benchmark baseline for `benches/fit_large.sh`: one single-threaded pass of
//! the csv crate over a file, parsing every field after the first (the label)
//! with `str::parse::<f64>`. Prints the row count and the sum of the values
//! (so that the parsing cannot be optimised away).
//!
//! Usage: `cargo run --release --manifest-path benches/csv_pass/Cargo.toml -- FILE`

use std::process::ExitCode;

fn main() -> ExitCode {
    let Some(path) = std::env::args().nth(1) else {
        eprintln!("usage: csv_pass FILE");
        return ExitCode::from(2);
    };
    let file = match std::fs::File::open(&path) {
        Ok(f) => f,
        Err(e) => {
            eprintln!("{path}: {e}");
            return ExitCode::FAILURE;
        }
    };
    let mut reader = csv::ReaderBuilder::new().from_reader(file);
    let mut record = csv::StringRecord::new();
    let (mut rows, mut sum, mut bad) = (0u64, 0.0f64, 0u64);
    loop {
        match reader.read_record(&mut record) {
            Ok(true) => {}
            Ok(false) => break,
            Err(e) => {
                eprintln!("{path}: {e}");
                return ExitCode::FAILURE;
            }
        }
        rows += 1;
        for field in record.iter().skip(1) {
            match field.parse::<f64>() {
                Ok(x) => sum += x,
                Err(_) => bad += 1,
            }
        }
    }
    println!("{rows} rows, sum {sum}, {bad} fields not numbers");
    ExitCode::SUCCESS
}
