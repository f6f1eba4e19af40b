//! Baseline for the `analyze` speed budget (DESIGN.md §6: replay time ≤ 2×
//! plain CSV parsing of the same file): reads a run CSV with the same csv
//! reader settings, finds the same columns by name, parses them into f64 and
//! sums them, with no monitor and no alarms.
//!
//! For another logger's layout (a `[csv]` table), the same file's plain
//! parse: its preamble lines skipped, its delimiter, every column of the
//! header parsed (a decimal comma turned into a point first), no unit
//! conversion.
//!
//! ```text
//! cargo run --release -p heatbound-host --example csv_parse_baseline -- FILE.csv
//! cargo run --release -p heatbound-host --example csv_parse_baseline -- FILE.csv \
//!     --delimiter ';' --decimal , --skip-lines 3
//! ```
use std::io::BufRead as _;
use std::process::ExitCode;

/// A logger's layout, as the `[csv]` table gives it.
struct Layout {
    delimiter: u8,
    decimal: u8,
    skip_lines: usize,
}

fn main() -> ExitCode {
    let mut args = std::env::args().skip(1);
    let Some(path) = args.next() else {
        eprintln!(
            "usage: csv_parse_baseline FILE.csv [--delimiter C] [--decimal C] [--skip-lines N]"
        );
        return ExitCode::from(2);
    };
    let mut layout = None::<Layout>;
    while let Some(flag) = args.next() {
        let value = args.next().unwrap_or_default();
        let l = layout.get_or_insert(Layout {
            delimiter: b',',
            decimal: b'.',
            skip_lines: 0,
        });
        match flag.as_str() {
            "--delimiter" => l.delimiter = value.bytes().next().unwrap_or(b','),
            "--decimal" => l.decimal = value.bytes().next().unwrap_or(b'.'),
            "--skip-lines" => l.skip_lines = value.parse().unwrap_or(0),
            _ => {
                eprintln!("csv_parse_baseline: unknown flag {flag}");
                return ExitCode::from(2);
            }
        }
    }
    let result = match &layout {
        None => run(&path),
        Some(layout) => run_layout(&path, layout),
    };
    match result {
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

fn run_layout(path: &str, layout: &Layout) -> Result<(u64, f64), Box<dyn std::error::Error>> {
    let mut input = std::io::BufReader::new(std::fs::File::open(path)?);
    let mut line = Vec::new();
    for _ in 0..layout.skip_lines {
        line.clear();
        input.read_until(b'\n', &mut line)?;
    }
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .delimiter(layout.delimiter)
        .buffer_capacity(1 << 16)
        .from_reader(input);
    let columns = reader.byte_headers()?.len();
    let mut record = csv::ByteRecord::new();
    let (mut rows, mut sum) = (0u64, 0.0f64);
    let mut copy = Vec::with_capacity(64);
    while reader.read_byte_record(&mut record)? {
        for i in 0..columns {
            let field = record.get(i).unwrap_or_default().trim_ascii();
            copy.clear();
            copy.extend(
                field
                    .iter()
                    .map(|&b| if b == layout.decimal { b'.' } else { b }),
            );
            let x = std::str::from_utf8(&copy)
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
