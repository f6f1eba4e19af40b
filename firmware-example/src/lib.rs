//! Example controller firmware for heatbound.
//!
//! For now this is a host-buildable library; the bare-metal binary, the
//! embedded-hal drivers and the simulated rig arrive with later work.
#![no_std]
#![deny(unsafe_code)]
#![warn(missing_docs)]

pub use heatbound;
