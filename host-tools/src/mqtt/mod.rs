//! Many rigs, one lab: `watch --publish` sends every row of its log to an
//! MQTT broker the lab already runs, and `lab` collects every rig's rows
//! into one log, verified as `watch` verifies them (`docs/mqtt.md`).
//!
//! - [`broker`]: the broker's address, login and TLS;
//! - [`topics`]: the topic tree and the binary record of one row;
//! - [`publisher`]: the watch's side, from its log to the broker, nothing lost;
//! - [`collector`]: the lab's side, from the broker to one log, each row once;
//! - [`overview`]: the lab's view, a line (or a JSON object) per rig;
//! - [`remote`]: a command from the lab, sealed with the rig's key, through the broker.
pub mod broker;
pub mod collector;
pub mod overview;
pub mod publisher;
pub mod remote;
pub mod topics;
