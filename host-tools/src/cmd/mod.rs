//! One module per subcommand.
pub mod analyze;
pub mod audit;
pub mod convert;
pub mod cycle;
pub mod watch;
pub mod simulate;
