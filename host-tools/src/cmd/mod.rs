//! One module per subcommand.
pub mod analyze;
pub mod audit;
pub mod chart;
pub mod convert;
pub mod cycle;
pub mod demo;
pub mod export;
pub mod lab;
pub mod operate;
pub mod report;
pub mod shell;
pub mod simulate;
pub mod watch;
