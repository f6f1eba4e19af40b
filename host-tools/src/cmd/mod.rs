//! One module per subcommand.
pub mod analyze;
pub mod audit;
pub mod chart;
pub mod convert;
pub mod cycle;
pub mod demo;
pub mod lab;
pub mod operate;
pub mod shell;
pub mod simulate;
pub mod watch;
