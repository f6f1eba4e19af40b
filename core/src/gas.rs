//! Ideal-gas processes, cycles and measured p-V loops.
