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
//! ```text
//! board or sim_bus --(SPI/I2C bytes, pulses)--> drivers --> app::App::tick
//!     --> Sample --> Monitor --> AlarmSet --> trip pin, wire frames --> UART
//! ```
//!
//! What is here:
//! - [`drivers`]: embedded-hal 1.0 drivers, each a pure `conversion` module
//!   plus the bus side: [`drivers::max31855`] (K-type thermocouple converter
//!   on SPI, with ITS-90 cold-junction compensation), [`drivers::ina226`]
//!   (current/voltage monitor on I2C) and [`drivers::flow`] (pulse-counting
//!   flow meter and coolant calorimetry);
//! - [`app`]: the [`App`](app::App), generic over `SpiDevice`, `I2c`,
//!   `OutputPin`, `embedded_io::Write` and a heat-out channel, with time as an
//!   argument: `start(t_ms)`, `tick(t_ms)`, `acknowledge_all(t_ms)`;
//! - [`rig`]: a simulated bench heat engine (an electrically heated
//!   Stirling-type engine with a water-cooled cold side), with seeded,
//!   bit-exact measurement noise and the fault scenarios the alarms must
//!   catch. No heap, no clock: time is always an argument;
//! - [`sim_bus`]: the rig behind the same traits, answering with the bytes
//!   the real chips would send, with fault injection.
//!
//! The bare-metal binary for QEMU mps2-an386 (`src/bin/mps2_an386`, feature
//! `bare-metal`; `memory.x`, `build.rs`, the runner in `.cargo/config.toml`)
//! builds the devices, calls [`app::App::start`] and then [`app::App::tick`]
//! once per sample; `scripts/` runs it in the emulator.
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

pub mod app;
pub mod drivers;
pub mod rig;
pub mod sim_bus;
