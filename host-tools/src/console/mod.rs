//! The live console of `watch` and `demo`: one screen that says at a
//! glance whether the rig is healthy, how close it runs to its limit, what
//! has alarmed and what has been acknowledged, and where the operator
//! answers an alarm.
//!
//! ```text
//! link thread:  link --> Ingest --Observed--> channel ─┐
//!                        Downlink <--Request-- channel ─┼─ console (this thread):
//!                                                      │  Model (what is known) + View (keys)
//!                                                      └─ draw every 100 ms; keys --> Requests
//! ```
//!
//! [`model`] holds the state and [`keys`] the operator's keys, both pure;
//! [`draw`] turns them into one ratatui frame, tested at several sizes with
//! ratatui's `TestBackend`; [`run`] drives a real terminal. Every operator
//! action goes to the log: commands as commands, the rest as notes.
pub mod draw;
pub mod keys;
pub mod model;
mod run;

pub use run::{Console, run};
