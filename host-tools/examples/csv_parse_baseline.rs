//! Baseline for the `analyze` speed budget (DESIGN.md §6: replay time ≤ 2×
//! plain CSV parsing of the same file): reads a run CSV with the same csv
//! reader settings, finds the same columns by name, parses them into f64 and
//! sums them, with no monitor and no alarms.
//!
//! ```text
//! cargo run --release -p heatbound-host --example csv_parse_baseline -- FILE.csv
//! ```
use std::process::ExitCode;

fn main() -> ExitCode {
    let Some(path) = std::env::args().nth(1) else {
        eprintln!("usage: csv_parse_baseline FILE.csv");
        return ExitCode::from(2);
    };
    match run(&path) {
        Ok((rows, sum)) => {
            println!("{rows} rows, checksum {sum}");
            ExitCode::SUCCESS
        }
        Err(e) => {
            eprintln!("csv_parse_baseline: {path}: {e}");
            ExitCode::from(2)
        }
    }
}

fn run(path: &str) -> Result<(u64, f64), Box<dyn std::error::Error>> {
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .buffer_capacity(1 << 16)
        .from_path(path)?;
    let header = reader.byte_headers()?.clone();
    let wanted = [
        "time_s",
        "hot_c",
        "hot_k",
        "cold_c",
        "cold_k",
        "heat_in_w",
        "work_w",
        "heat_out_w",
    ];
    let columns: Vec<usize> = header
        .iter()
        .enumerate()
        .filter(|(_, name)| wanted.iter().any(|w| w.as_bytes() == name.trim_ascii()))
        .map(|(i, _)| i)
        .collect();
    let mut record = csv::ByteRecord::new();
    let (mut rows, mut sum) = (0u64, 0.0f64);
    while reader.read_byte_record(&mut record)? {
        for &i in &columns {
            let field = record.get(i).unwrap_or_default().trim_ascii();
            let x = std::str::from_utf8(field)
                .ok()
                .and_then(|s| s.parse::<f64>().ok())
                .unwrap_or(f64::NAN);
            if x.is_finite() {
                sum += x;
            }
        }
        rows += 1;
    }
    Ok((rows, sum))
}
