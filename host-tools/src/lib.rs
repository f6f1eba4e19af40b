//! `heatbound-host`: the host tool's library half, shared by the `heatbound`
//! binary, its integration tests and examples.
//!
//! - [`store`]: the SQLite log (schema, migrations, batched writes, reader API);
//! - [`ingest`]: bytes → frames → the log and live lines (`watch`, `demo`).
//!
//! The subcommands themselves (`cmd`) live in the binary.
pub mod audit;
pub mod ingest;
pub mod store;
