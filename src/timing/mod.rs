//! TEMPORARY copy of the timing parameters (branch h-char owns this file); replaced by the
//! characterised definition when h-char is merged. Only `pub mod engine;` and
//! `pub mod search;` are this branch's lines.

pub mod engine;
pub mod search;

use serde::{Deserialize, Serialize};

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Timing {
    pub input_slew_ps: f64,
    pub n_width_um: f64,
    pub p_width_um: f64,
    pub r_n_fall_kohm_um: [f64; 3],
    pub r_p_rise_kohm_um: [f64; 3],
    pub r_pass_n_fall_kohm_um: f64,
    pub r_pass_n_rise_kohm_um: f64,
    pub r_tg_fall_kohm_um: f64,
    pub r_tg_rise_kohm_um: f64,
    pub c_gate_n_ff_um: f64,
    pub c_gate_p_ff_um: f64,
    pub c_diff_n_ff_um: f64,
    pub c_diff_p_ff_um: f64,
    pub fo4_ps: f64,
    pub tau_ps: f64,
    pub p_inv: f64,
}
