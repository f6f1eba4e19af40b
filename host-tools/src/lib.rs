//! `heatbound-host`: the host tool's library half, shared by the `heatbound`
//! binary, its integration tests and examples.
//!
//! The engines, in the order data flows through them:
//!
//! - [`cycle_file`]: an ideal-gas reference cycle from TOML, evaluated, as a table or JSON;
//! - [`rigfile`]: `rig.toml` read, validated and its errors placed at line and column;
//! - [`csv_layout`]: the `[csv]` table of `rig.toml`: a logger's CSV layout and units;
//! - [`replay`]: a recorded run (CSV) through the monitor and alarms, and its report;
//! - [`sil`]: software in the loop: rig -> Monitor -> AlarmSet -> frames (`simulate`, `demo`);
//! - [`link`]: the serial, TCP or file source of the bytes, its outages and reconnects;
//! - [`live`]: the process holding a live link: control socket, downlink, lines or console;
//! - [`keyfile`]: the rig's command key, from a file only its owner may read;
//! - [`downlink`]: operators' commands sealed, sent on the link, matched with replies;
//! - [`showcase`]: the demo's run, over loopback, as lines or on the console;
//! - [`operator`]: a scripted operator who acknowledges trips over the link (`demo`);
//! - [`control`]: the local control socket through which `ack`, `configure`
//!   and `new-run` reach the process holding the link;
//! - [`fanout`]: `simulate --listen` serving every client, dropping one that stops reading;
//! - [`ingest`]: bytes → frames → the log and live lines (`watch`, `demo`);
//! - [`frame_json`]: frames as JSON objects (`watch --json`);
//! - [`store`]: the SQLite log (schema, migrations, batched writes, reader API);
//! - [`capture`]: a raw capture or a log run read from disk as the audit's input;
//! - [`audit`]: the audit engine, pure: integrity, recomputation, second law, alarm consistency;
//! - [`chart`]: the chart renderer, a run of the log as a PNG or SVG picture;
//! - [`report`]: one run (a log, or a replayed CSV) as a self-contained HTML test report;
//! - [`export`]: a run of the log as CSV, one row per summary (`export`);
//! - [`console`]: the live console of `watch` and `demo` (ratatui);
//! - [`term`]: what every command prints beside its output (the safety note).
//!
//! The subcommands themselves (`cmd`) live in the binary; each parses its
//! arguments, calls these engines and prints.
#![warn(missing_docs)]
pub mod audit;
pub mod capture;
pub mod chart;
pub mod console;
pub mod control;
pub mod csv_layout;
pub mod cycle_file;
pub mod diagnosis_report;
pub mod downlink;
pub mod export;
pub mod fanout;
pub mod frame_json;
pub mod ingest;
pub mod keyfile;
pub mod link;
pub mod live;
pub mod mqtt;
pub mod operator;
pub mod replay;
pub mod report;
pub mod rigfile;
pub mod showcase;
pub mod sil;
pub mod store;
pub mod term;
pub mod verdict_check;
