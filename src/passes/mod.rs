//! Passes: choices made with the timing engine before the netlist is final. Each takes the
//! spec as the user wrote it (other keys resolved) and returns what the builders need;
//! builders stay free of timing, and views never re-derive the choice.

pub mod blocks;
pub mod buffers;
pub mod sizing;
