//! Host ingest throughput: decode + SQLite log through `Ingest`, against a
//! plain rusqlite insert loop of the same rows into the same table, with the
//! same columns, values computed beforehand (DESIGN.md §6: ≥ 100k
//! summaries/s).
//!
//! ```text
//! cargo run --release -p heatbound-host --example ingest_bench [-- SUMMARIES]
//! ```
use std::time::Instant;

use heatbound::num::Real;
use heatbound::wire::{self, Frame, Status, Summary};
use heatbound_host::ingest::{Ingest, LineStyle};
use heatbound_host::store::Log;
use rusqlite::{Connection, params};

/// A Summary as a controller makes it: a 6000 ms window (`Real::from_ms`),
/// heat out inferred (`Q_in − W`) and σ̇ what its integrals give.
fn summary(seq: u32) -> Summary {
    let x = seq as f32;
    let heat_in_j = 6000.0 + x * 0.01;
    let mut s = Summary {
        seq: seq as u16,
        t_ms: seq.wrapping_mul(1000),
        duration_s: <f32 as Real>::from_ms(6000),
        heat_in_j,
        work_j: 1800.0,
        heat_out_j: heat_in_j - 1800.0,
        entropy_in_j_per_k: 10.0,
        entropy_out_j_per_k: 14.0,
        ambient_k: Some(293.15),
        u_performance: Some(0.004),
        u_bound: Some(0.002),
        u_margin: Some(0.0045),
        u_entropy_rate_w_per_k: None,
        status: Status {
            steady: true,
            ..Status::default()
        },
        ..Summary::default()
    };
    s.entropy_rate_w_per_k = s.metrics().entropy_rate_w_per_k;
    s
}

fn main() -> anyhow::Result<()> {
    let n: u32 = match std::env::args().nth(1) {
        Some(a) => a.parse()?,
        None => 200_000,
    };
    let mut bytes = Vec::with_capacity(n as usize * 80);
    let mut buf = [0u8; wire::MAX_FRAME_LEN];
    for seq in 0..n {
        let len = wire::encode(&Frame::Summary(summary(seq)), &mut buf)?;
        bytes.extend_from_slice(&buf[..len]);
    }
    let dir = tempfile::tempdir()?;

    // Decode + log through Ingest, fed in 4 KiB reads like a socket would.
    let log = Log::open(&dir.path().join("ingest.sqlite"))?;
    let start = Instant::now();
    let mut ingest = Ingest::new(log, "file:bench", 0, LineStyle::Quiet)?;
    for (i, chunk) in bytes.chunks(4096).enumerate() {
        ingest.feed(chunk, i as i64, |_| {})?;
    }
    let totals = ingest.finish(0)?;
    let t_ingest = start.elapsed().as_secs_f64();
    anyhow::ensure!(
        totals.summaries == u64::from(n),
        "lost summaries: {totals:?}"
    );

    // The same rows with a plain loop: the log's own schema (every
    // migration), the same columns and values, computed beforehand; one
    // transaction, one prepared statement, no batching, no decoding.
    let conn = Connection::open(dir.path().join("plain.sqlite"))?;
    conn.pragma_update(None, "journal_mode", "WAL")?;
    conn.pragma_update(None, "synchronous", "NORMAL")?;
    for m in heatbound_host::store::MIGRATIONS {
        conn.execute_batch(m)?;
    }
    conn.execute(
        "INSERT INTO runs (started_host_ms, source, tool_version) VALUES (0, 'plain', '0')",
        [],
    )?;
    let rows: Vec<Summary> = (0..n).map(summary).collect();
    let o = |x: Option<f32>| x.map(f64::from);
    let start = Instant::now();
    let tx = conn.unchecked_transaction()?;
    {
        let mut st = tx.prepare(
            "INSERT INTO summaries (run_id, ord, host_ms, seq, t_ms,
             duration_s, heat_in_j, work_j, heat_out_j, entropy_in_j_per_k, entropy_out_j_per_k,
             hot_mean_k, ambient_k, performance, bound, entropy_rate_w_per_k, u_performance, u_bound,
             u_margin, u_entropy_rate_w_per_k, status, faults, alarms, hot_temperature_integral_k_s,
             hot_pair_integral_k_s, verdict, suspect, suspect_bias, mode)
             VALUES (1, ?1, 0, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15,
             ?16, ?17, ?18, 1, 0, 0, ?19, NULL, NULL, NULL, NULL, 'engine')",
        )?;
        for (i, s) in rows.iter().enumerate() {
            st.execute(params![
                i as i64,
                s.seq,
                s.t_ms,
                f64::from(s.duration_s),
                f64::from(s.heat_in_j),
                f64::from(s.work_j),
                f64::from(s.heat_out_j),
                f64::from(s.entropy_in_j_per_k),
                f64::from(s.entropy_out_j_per_k),
                o(s.hot_mean_k()),
                o(s.ambient_k),
                o(s.performance()),
                o(s.bound()),
                o(s.entropy_rate_w_per_k),
                o(s.u_performance),
                o(s.u_bound),
                o(s.u_margin),
                o(s.u_entropy_rate_w_per_k),
                f64::from(s.hot_temperature_integral_k_s),
            ])?;
        }
    }
    tx.commit()?;
    let t_plain = start.elapsed().as_secs_f64();

    let rate = f64::from(n) / t_ingest;
    let plain = f64::from(n) / t_plain;
    println!(
        "summaries:            {n} ({} bytes on the wire)",
        bytes.len()
    );
    println!("Ingest (decode + log): {t_ingest:.3} s, {rate:.0} summaries/s (budget 100000)");
    println!("plain rusqlite loop:   {t_plain:.3} s, {plain:.0} rows/s");
    println!("ratio Ingest/plain:    {:.2}x the time", t_ingest / t_plain);
    Ok(())
}
