//! The log reader behind `audit` and `chart` on altered logs: a genuine log
//! is written once, then each input alters a copy of it, cell by cell
//! through SQL (any value of any type in any column, deleted or copied
//! rows) and byte by byte in the file. Reading, auditing and charting the
//! result must never panic; they return a report or a typed error.
#![no_main]

use std::path::Path;
use std::sync::OnceLock;

use heatbound::config::RigConfig;
use heatbound_firmware_example::rig::Scenario;
use heatbound_host::ingest::{Ingest, LineStyle};
use heatbound_host::sil::{self, SimOptions, Simulation};
use heatbound_host::store::Log;
use heatbound_host::{audit, chart};
use libfuzzer_sys::fuzz_target;
use rusqlite::types::Value;
use rusqlite::{Connection, params};

/// The genuine log's bytes, and its tables with their columns.
struct Genuine {
    bytes: Vec<u8>,
    tables: Vec<(String, Vec<String>)>,
}

fn genuine() -> &'static Genuine {
    static GENUINE: OnceLock<Genuine> = OnceLock::new();
    GENUINE.get_or_init(|| {
        let dir = tempfile::tempdir().expect("a temporary folder");
        let path = dir.path().join("genuine.sqlite");
        let options = SimOptions {
            scenario: Scenario::CoolantLoss,
            duration_s: 200.0,
            rate_hz: 5.0,
            ..SimOptions::default()
        };
        let config = RigConfig::default();
        let mut sim = Simulation::new(&options, &config).expect("the simulation starts");
        let log = Log::open(&path).expect("a fresh log");
        let mut ingest = Ingest::new(log, "fuzz", 0, LineStyle::Quiet).expect("a run");
        let (mut frames, mut bytes) = (Vec::new(), Vec::new());
        while let Some(t_ms) = sim.next_tick(&mut frames) {
            for frame in frames.drain(..) {
                sil::encode_into(&frame, &mut bytes).expect("frames encode");
            }
            ingest
                .feed(&bytes, i64::from(t_ms), |_| {})
                .expect("frames store");
            bytes.clear();
        }
        ingest.finish(200_000).expect("the run closes");
        let conn = Connection::open(&path).expect("the log opens");
        let mut tables = Vec::new();
        let names: Vec<String> = conn
            .prepare("SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name")
            .and_then(|mut s| s.query_map([], |r| r.get(0))?.collect())
            .expect("the tables list");
        for name in names {
            let columns: Vec<String> = conn
                .prepare(&format!("SELECT name FROM pragma_table_info('{name}')"))
                .and_then(|mut s| s.query_map([], |r| r.get(0))?.collect())
                .expect("the columns list");
            tables.push((name, columns));
        }
        drop(conn);
        Genuine {
            bytes: std::fs::read(&path).expect("the log reads"),
            tables,
        }
    })
}

/// Takes bytes from the front of the input.
struct Input<'a>(&'a [u8]);

impl Input<'_> {
    fn byte(&mut self) -> Option<u8> {
        let (&b, rest) = self.0.split_first()?;
        self.0 = rest;
        Some(b)
    }
    fn bytes<const N: usize>(&mut self) -> Option<[u8; N]> {
        let (head, rest) = self.0.split_first_chunk::<N>()?;
        self.0 = rest;
        Some(*head)
    }
    fn value(&mut self) -> Option<Value> {
        Some(match self.byte()? % 9 {
            0 => Value::Null,
            1 => Value::Integer(i64::from_le_bytes(self.bytes()?)),
            2 => Value::Real(f64::from_le_bytes(self.bytes()?)),
            3 => Value::Integer(i64::from(u32::MAX) + i64::from(self.byte()?) - 128),
            4 => Value::Real(
                [f64::NAN, f64::INFINITY, -1e308, 1e308, -0.0][usize::from(self.byte()? % 5)],
            ),
            5 => Value::Integer(i64::from(i8::from_le_bytes([self.byte()?]))),
            6 => Value::Integer([i64::MAX, i64::MIN, 0, -1][usize::from(self.byte()? % 4)]),
            7 => {
                let n = usize::from(self.byte()? % 16);
                let text: String = (0..n).filter_map(|_| self.byte().map(char::from)).collect();
                Value::Text(text)
            }
            _ => {
                let n = usize::from(self.byte()? % 64);
                Value::Blob((0..n).filter_map(|_| self.byte()).collect())
            }
        })
    }
}

/// Applies the input's alterations to the log at `path`.
fn alter(path: &Path, input: &mut Input<'_>) {
    let tables = &genuine().tables;
    let Ok(conn) = Connection::open(path) else {
        return;
    };
    let _ = conn.pragma_update(None, "foreign_keys", "OFF");
    while let Some(op) = input.byte() {
        let Some((table, columns)) = input.byte().map(|b| &tables[usize::from(b) % tables.len()])
        else {
            break;
        };
        let Some(row) = input.bytes::<2>().map(u16::from_le_bytes) else {
            break;
        };
        let pick = format!("(SELECT rowid FROM \"{table}\" LIMIT 1 OFFSET {row})");
        match op % 8 {
            // Most alterations change one cell.
            0..=4 => {
                let Some(column) = input
                    .byte()
                    .map(|b| &columns[usize::from(b) % columns.len()])
                else {
                    break;
                };
                let Some(value) = input.value() else {
                    break;
                };
                let sql = format!("UPDATE \"{table}\" SET \"{column}\" = ?1 WHERE rowid = {pick}");
                let _ = conn.execute(&sql, params![value]);
            }
            5 => {
                let _ = conn.execute(&format!("DELETE FROM \"{table}\" WHERE rowid = {pick}"), []);
            }
            6 => {
                // A copy of a row under a new rowid: a replayed or spliced record.
                let list = columns
                    .iter()
                    .map(|c| format!("\"{c}\""))
                    .collect::<Vec<_>>()
                    .join(", ");
                let sql = format!(
                    "INSERT INTO \"{table}\" ({list}) SELECT {list} FROM \"{table}\" WHERE rowid = {pick}"
                );
                let _ = conn.execute(&sql, []);
            }
            _ => {
                let _ = conn.execute(&format!("DELETE FROM \"{table}\""), []);
            }
        }
        if input.0.first().is_some_and(|&b| b == 0xFF) {
            break;
        }
    }
    drop(conn);
    // Whatever is left flips bytes in the file itself.
    let Ok(mut bytes) = std::fs::read(path) else {
        return;
    };
    while let (Some(at), Some(x)) = (input.bytes::<3>(), input.byte()) {
        let at = (usize::from(at[0]) | usize::from(at[1]) << 8 | usize::from(at[2]) << 16)
            % bytes.len().max(1);
        if let Some(b) = bytes.get_mut(at) {
            *b ^= x;
        }
    }
    let _ = std::fs::write(path, bytes);
}

fn read_back(path: &Path, out: &Path) {
    if let Ok(log) = Log::open_read(path) {
        match audit::audit_log(&log, None, &RigConfig::default()) {
            Ok(report) => {
                let _ = report.text("fuzz.sqlite");
                let _ = serde_json::to_string(&report);
            }
            Err(e) => assert!(!e.to_string().is_empty()),
        }
    }
    if let Err(e) = chart::write_chart(path, None, out) {
        assert!(!e.to_string().is_empty());
    }
}

fuzz_target!(|data: &[u8]| {
    let genuine = genuine();
    let Ok(dir) = tempfile::tempdir() else {
        return;
    };
    let path = dir.path().join("altered.sqlite");
    if std::fs::write(&path, &genuine.bytes).is_err() {
        return;
    }
    alter(&path, &mut Input(data));
    read_back(&path, &dir.path().join("chart.svg"));
});
