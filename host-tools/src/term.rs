//! What every command prints beside its output: the safety note. It sits at
//! the very end of the data flow, where reports reach the terminal; the
//! `heatbound` binary's help text carries it too.

/// Cautions printed beside reports and in the help text.
pub const SAFETY_NOTE: &str = "Caution: heat-engine rigs have hot surfaces, pressurised parts, \
rotating parts and electric heaters. heatbound alarms are monitoring aids, not a safety-rated \
interlock: keep hardwired cut-outs, relief devices and guards in place, and follow local codes \
and licensed practice.";
