//! # heatbound
//!
//! The computation behind heatbound: a `no_std`, heap-free library that turns
//! the readings of a heat-engine test rig into the figures a test engineer
//! needs live — how much of the heat becomes work, how far that is from the
//! Carnot bound of the two temperatures, and how much entropy the rig
//! generates (and so how much work is lost, by Gouy–Stodola).
//!
//! The same code runs on the controller beside the rig, in the
//! software-in-the-loop simulation, in the emulator and in the host tool's
//! offline replay.
//!
//! ```text
//! sensors --> sensor (ITS-90, IEC 60751, calorimetry, shaft power, channel health)
//!         --> monitor (window + run totals, O(1) per sample) --> alarm
//!         --> wire (postcard + CRC-32 + COBS frames) --> UART --> host
//!         <-- wire commands (HMAC-sealed, counted) <-- UART <-- host
//! control:    the controller itself: monitor + alarms + both link directions
//! config:     rig settings, validated, with documented defaults
//! design:     gas (ideal-gas processes, cycles, p-V loops)
//! ```
//!
//! Module by module:
//! - [`sensor`]: readings in, kelvin and watts out;
//! - [`monitor`]: the figures of a sliding window and of the whole run, with
//!   their GUM uncertainties;
//! - [`alarm`]: the rules and their state machines;
//! - [`wire`]: the frames the controller streams, the commands it is sent,
//!   and the decoders of both;
//! - [`control`]: the controller: one monitor, its alarms, the frames it
//!   streams and the commands it answers;
//! - [`config`]: what the monitor and alarms need to know about a rig;
//! - [`gas`]: ideal-gas reference cycles to compare a rig with;
//! - [`num`]: the float type the monitor computes in, and its sums;
//! - [`units`]: physical constants every module may use (a leaf).
//!
//! Units are SI throughout and carried in names (`t_hot_k`, `heat_in_w`);
//! temperatures are kelvin inside the library, with °C only at the sensor edge.
//!
//! ## Features
//! - `std`: marks host builds; nothing in the computation depends on it.
//! - `defmt`: derives `defmt::Format` on public types for firmware logging.
#![cfg_attr(not(any(test, feature = "std")), no_std)]
#![deny(unsafe_code)]
#![warn(missing_docs)]

pub mod alarm;
pub mod config;
pub mod control;
pub mod diagnosis;
pub mod gas;
pub mod monitor;
pub mod num;
pub mod sensor;
pub mod units;
pub mod wire;

pub use units::{MOLAR_GAS_CONSTANT, ZERO_CELSIUS_K};
