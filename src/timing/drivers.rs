//! The deck's input and clock drivers, and the edge they give the adder's pins.
//!
//! Every input (a, b, cin, and clk in dynamic style) is driven through an even chain of
//! inverters tapered geometrically from a unit inverter (`sizing.unit_n`, `pn_ratio`) to the
//! pin's own capacitance: F = C_pin / C_unit, n = the smallest even number of stages (at
//! least 2) with a stage effort F^(1/n) of at most 4, stage i (from 0) F^(i/n) unit widths
//! (logical effort's tapered buffer, best stage effort about 4; Sutherland, Sproull &
//! Harris 1999). The data drivers sit on a supply of their own (`vdrv`), the clock driver on
//! another (`vclkd`) so that the clock's energy is measured apart from the adder's.
//!
//! The timing engine starts each input's edge with the slew this driver gives it: the last
//! stage's switching resistance (the characterised single-device values, mean of rise and
//! fall) into the pin's capacitance plus its own drains: 2.2·R·C (10–90 % of a single pole),
//! or with a ramp characterisation the transition of a chain of like stages
//! ([`super::engine::Slope::chain_slew`]).
//! Deck and engine both time from the pin's 50 % crossing.

use super::Timing;
use crate::spec::Spec;

/// Best stage effort of a tapered chain (Sutherland, Sproull & Harris 1999: about 4).
pub const STAGE_EFFORT: f64 = 4.0;

/// One driver chain: each stage's NMOS width (µm); the PMOS is `pn_ratio` times wider.
#[derive(Debug, Clone, PartialEq)]
pub struct Chain {
    pub nmos_um: Vec<f64>,
}

/// Input capacitance of a unit inverter, fF.
fn c_unit(spec: &Spec, tm: &Timing) -> f64 {
    let z = &spec.sizing;
    z.unit_n * (tm.c_gate_n_ff_um + z.pn_ratio * tm.c_gate_p_ff_um)
}

fn round3(x: f64) -> f64 {
    (x * 1000.0).round() / 1000.0
}

/// The chain that drives a pin of `c_pin_ff`.
pub fn chain(spec: &Spec, tm: &Timing, c_pin_ff: f64) -> Chain {
    let f = (c_pin_ff / c_unit(spec, tm)).max(1.0);
    let mut n = (f.ln() / STAGE_EFFORT.ln()).ceil().max(2.0) as usize;
    if n % 2 == 1 {
        n += 1;
    }
    let w_min = spec.technology.w_min;
    Chain {
        nmos_um: (0..n)
            .map(|i| round3((spec.sizing.unit_n * f.powf(i as f64 / n as f64)).max(w_min)))
            .collect(),
    }
}

/// The 10–90 % transition (ps) the chain's last stage gives a pin of `c_pin_ff`.
pub fn pin_slew_ps(spec: &Spec, tm: &Timing, c_pin_ff: f64) -> f64 {
    let c = chain(spec, tm, c_pin_ff);
    let wn = *c.nmos_um.last().expect("at least two stages");
    let wp = wn * spec.sizing.pn_ratio;
    let r = 0.5 * (tm.r_n_fall_kohm_um[0] / wn + tm.r_p_rise_kohm_um[0] / wp);
    let cap = c_pin_ff + wn * tm.c_diff_n_ff_um + wp * tm.c_diff_p_ff_um;
    super::engine::slope_share(tm).chain_slew(r * cap)
}

/// The chain's delay from its source's edge to the pin's 50 % (ps), for the deck's timing
/// windows: each stage 0.69·R·C into the next stage's gate (the last into the pin).
pub fn delay_ps(spec: &Spec, tm: &Timing, c_pin_ff: f64) -> f64 {
    let c = chain(spec, tm, c_pin_ff);
    let pn = spec.sizing.pn_ratio;
    let mut t = 0.0;
    for (i, &wn) in c.nmos_um.iter().enumerate() {
        let wp = wn * pn;
        let r = 0.5 * (tm.r_n_fall_kohm_um[0] / wn + tm.r_p_rise_kohm_um[0] / wp);
        let load = match c.nmos_um.get(i + 1) {
            Some(&next) => next * (tm.c_gate_n_ff_um + pn * tm.c_gate_p_ff_um),
            None => c_pin_ff,
        };
        let cap = load + wn * tm.c_diff_n_ff_um + wp * tm.c_diff_p_ff_um;
        t += 0.69 * r * cap;
    }
    t
}
