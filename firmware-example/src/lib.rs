//! Example controller firmware for heatbound.
//!
//! This library is the part of the firmware that does not depend on a
//! particular board. It is shared by three consumers:
//! - the bare-metal firmware for an emulated Cortex-M4F board;
//! - the PC software-in-the-loop run (`heatbound simulate`);
//! - the tests, which drive the real [`heatbound::monitor::Monitor`] and
//!   [`heatbound::alarm::AlarmSet`] with it.
//!
//! ```text
//! rig (simulated physics) --> Measured (what the sensors report) --> Sample
//!     --> heatbound::monitor::Monitor --> heatbound::alarm::AlarmSet
//! ```
//!
//! What is here now:
//! - [`rig`]: a simulated bench heat engine (an electrically heated
//!   Stirling-type engine with a water-cooled cold side), with seeded,
//!   bit-exact measurement noise and the fault scenarios the alarms must
//!   catch. No heap, no clock: time is always an argument.
//!
//! What arrives later: the embedded-hal 1.0 drivers (thermocouple and RTD
//! converters, power meters, the flow counter), an `App` generic over the HAL
//! traits, and bus-level implementations of those traits on top of [`rig`]
//! (fed by [`rig::Rig::measured`]), so that the same application code runs on a
//! board, in the emulator and on a PC.
//!
//! ```
//! use heatbound_firmware_example::rig::{Rig, Scenario};
//!
//! let mut rig = Rig::bench_stirling(Scenario::Steady, 7);
//! rig.step(0.1);
//! let s = rig.sample(100);
//! assert!(s.work_w > 0.0 && s.work_w < s.heat_in_w);
//! ```
#![no_std]
#![deny(unsafe_code)]
#![warn(missing_docs)]

pub use heatbound;

pub mod rig;
