//! Logging that costs nothing without the `defmt` feature.
//!
//! Where it sits: beside everything in this crate. With `defmt` on, each
//! macro is the defmt macro of the same name (RTT, read by probe-rs);
//! without it the arguments are still type-checked and then dropped, so a
//! build without a probe carries no strings and no logger.

macro_rules! info {
    ($s:literal $(, $x:expr)* $(,)?) => {{
        #[cfg(feature = "defmt")]
        ::defmt::info!($s $(, $x)*);
        #[cfg(not(feature = "defmt"))]
        let _ = ($(&$x,)*);
    }};
}

macro_rules! warn {
    ($s:literal $(, $x:expr)* $(,)?) => {{
        #[cfg(feature = "defmt")]
        ::defmt::warn!($s $(, $x)*);
        #[cfg(not(feature = "defmt"))]
        let _ = ($(&$x,)*);
    }};
}

macro_rules! error {
    ($s:literal $(, $x:expr)* $(,)?) => {{
        #[cfg(feature = "defmt")]
        ::defmt::error!($s $(, $x)*);
        #[cfg(not(feature = "defmt"))]
        let _ = ($(&$x,)*);
    }};
}
