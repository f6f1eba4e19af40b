//! Prints the RAM taken by the monitor and alarm state, for the size report.
//!
//! `cargo run -p heatbound --example sizes`
use core::mem::size_of;

use heatbound::alarm::AlarmSet;
use heatbound::config::RigConfig;
use heatbound::monitor::Monitor;

fn main() {
    println!("Monitor<64, f32>   {:>6} bytes", size_of::<Monitor<64>>());
    println!(
        "Monitor<64, f64>   {:>6} bytes",
        size_of::<Monitor<64, f64>>()
    );
    println!("Monitor<1024, f32> {:>6} bytes", size_of::<Monitor<1024>>());
    println!("AlarmSet           {:>6} bytes", size_of::<AlarmSet>());
    println!("RigConfig          {:>6} bytes", size_of::<RigConfig>());
    println!("budget: Monitor<64> + AlarmSet <= 8192 bytes");
}
