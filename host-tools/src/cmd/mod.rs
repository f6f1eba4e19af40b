//! One module per subcommand.
pub mod analyze;
pub mod convert;
pub mod cycle;
