//! The sweep's answer: for each width, the fastest, the smallest and the lowest-energy
//! design, and the smallest design that meets the target delay at every corner listed.
//! Beside the fastest it names the close calls: other designs at the same conditions whose
//! delay is too near the fastest's for the ranking to be trusted ([`ESTIMATE_CLOSE`],
//! [`MEASURED_CLOSE`]), so a reader confirms them in ngspice instead of taking the first row.

use super::{label, PointResult, Sweep, Target, CONDITION_KEYS};
use serde::Serialize;
use std::collections::BTreeMap;

/// Two estimated delays this close (relative to the faster) are a close call: the accuracy
/// benchmark (`tests/accuracy.rs`, GF180MCU typical, 2026-12-03) saw the engine put designs in
/// the wrong order when ngspice measured them up to 10 % apart (16-bit dynamic carry-skip
/// against Han-Carlson), and its errors run from about −9 % to +16 % by architecture.
pub const ESTIMATE_CLOSE: f64 = 0.10;
/// The same for two delays both measured in ngspice: within this the order is one the
/// layout's own parasitics (not in the deck) can easily reverse.
pub const MEASURED_CLOSE: f64 = 0.02;
/// Close calls named in a table cell; the rest are counted.
const CLOSE_SHOWN: usize = 3;

/// One width's answer; each entry a point index.
#[derive(Debug, Clone, Serialize)]
pub struct Answer {
    pub width: usize,
    pub fastest: Option<usize>,
    /// Close calls to the fastest: points of other designs at the fastest's conditions
    /// (corner, temperature, supply, load) within [`ESTIMATE_CLOSE`] of its delay
    /// ([`MEASURED_CLOSE`] when both are measured), fastest first.
    pub close_to_fastest: Vec<usize>,
    pub smallest: Option<usize>,
    pub lowest_energy: Option<usize>,
    /// The smallest design whose every corner's point meets the target with the margin:
    /// (the design's slowest point, the design's points).
    pub meets_target: Option<(usize, Vec<usize>)>,
    /// Designs considered for the target (every corner of them computed and ok).
    pub designs: usize,
}

fn min_by(points: &[&PointResult], f: impl Fn(&PointResult) -> Option<f64>) -> Option<usize> {
    points
        .iter()
        .filter_map(|p| f(p).map(|x| (x, p.index)))
        .min_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)))
        .map(|(_, i)| i)
}

/// A point's varied values whose keys pass `keep`, as one string.
fn values_key(p: &PointResult, keep: impl Fn(&str) -> bool) -> String {
    p.values
        .iter()
        .filter(|(k, _)| keep(k))
        .map(|(k, v)| format!("{k}={v}"))
        .collect::<Vec<_>>()
        .join(" ")
}

/// The design a point belongs to: its varied values other than the conditions.
fn design_key(p: &PointResult) -> String {
    values_key(p, |k| !CONDITION_KEYS.contains(&k))
}

/// The conditions a point is evaluated at, load included: its varied values among them.
fn conditions_key(p: &PointResult) -> String {
    values_key(p, |k| CONDITION_KEYS.contains(&k) || k == "load")
}

/// Points of other designs at the fastest's conditions whose delay is within the close-call
/// share of the fastest's, in order of delay (then index).
fn close_calls(points: &[&PointResult], fastest: usize) -> Vec<usize> {
    let Some(f) = points.iter().find(|p| p.index == fastest) else {
        return vec![];
    };
    let Some(df) = f.delay_ps() else {
        return vec![];
    };
    let (design, at) = (design_key(f), conditions_key(f));
    let mut close: Vec<(f64, usize)> = points
        .iter()
        .filter(|p| p.index != fastest && conditions_key(p) == at && design_key(p) != design)
        .filter_map(|p| {
            let d = p.delay_ps()?;
            let share = if f.sim_worst_ps.is_some() && p.sim_worst_ps.is_some() {
                MEASURED_CLOSE
            } else {
                ESTIMATE_CLOSE
            };
            (d <= df * (1.0 + share)).then_some((d, p.index))
        })
        .collect();
    close.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    close.into_iter().map(|(_, i)| i).collect()
}

pub fn answer(points: &[PointResult], target: Option<Target>) -> Vec<Answer> {
    let mut widths: BTreeMap<usize, Vec<&PointResult>> = BTreeMap::new();
    for p in points.iter().filter(|p| p.ok()) {
        if let Some(w) = p.width {
            widths.entry(w).or_default().push(p);
        }
    }
    let mut all_by_design: BTreeMap<String, Vec<&PointResult>> = BTreeMap::new();
    for p in points {
        all_by_design.entry(design_key(p)).or_default().push(p);
    }
    widths
        .into_iter()
        .map(|(w, ps)| {
            let mut designs = 0;
            let meets_target = target.and_then(|t| {
                let mut best: Option<(f64, usize, Vec<usize>)> = None;
                for group in all_by_design.values() {
                    if group.iter().any(|p| p.width != Some(w) || !p.ok()) {
                        continue;
                    }
                    designs += 1;
                    let slowest = group
                        .iter()
                        .max_by(|a, b| {
                            a.delay_ps()
                                .unwrap_or(f64::INFINITY)
                                .total_cmp(&b.delay_ps().unwrap_or(f64::INFINITY))
                        })
                        .expect("a point");
                    let d = slowest.delay_ps().unwrap_or(f64::INFINITY) * 1e-12;
                    if d * (1.0 + t.margin) > t.delay_s {
                        continue;
                    }
                    let area = group
                        .iter()
                        .filter_map(|p| p.gate_area_um2)
                        .fold(0.0, f64::max);
                    if best.as_ref().is_none_or(|b| area < b.0) {
                        best = Some((area, slowest.index, group.iter().map(|p| p.index).collect()));
                    }
                }
                best.map(|(_, i, g)| (i, g))
            });
            let fastest = min_by(&ps, |p| p.delay_ps());
            Answer {
                width: w,
                fastest,
                close_to_fastest: fastest.map(|f| close_calls(&ps, f)).unwrap_or_default(),
                smallest: min_by(&ps, |p| p.gate_area_um2),
                lowest_energy: min_by(&ps, |p| p.energy_fj),
                meets_target,
                designs,
            }
        })
        .collect()
}

fn describe(p: &PointResult) -> String {
    let delay = p
        .delay_ps()
        .map(|d| {
            format!(
                "{:.0} ps{}",
                d,
                if p.sim_worst_ps.is_some() {
                    " measured"
                } else {
                    ""
                }
            )
        })
        .unwrap_or_default();
    format!(
        "#{} {} ({delay}, {:.0} um2, {:.0} fJ)",
        p.index,
        label(p),
        p.gate_area_um2.unwrap_or(0.0),
        p.energy_fj.unwrap_or(0.0)
    )
}

/// The close calls of an answer as they follow the fastest in a table cell: nothing when
/// there are none, else "; close call, confirm in ngspice: ..." with at most `CLOSE_SHOWN`
/// named (each by `name`) and the rest counted.
pub fn close_text(
    points: &[PointResult],
    a: &Answer,
    name: impl Fn(&PointResult) -> String,
) -> String {
    if a.close_to_fastest.is_empty() {
        return String::new();
    }
    let named: Vec<String> = a
        .close_to_fastest
        .iter()
        .take(CLOSE_SHOWN)
        .filter_map(|&i| points.iter().find(|p| p.index == i))
        .map(name)
        .collect();
    let more = a.close_to_fastest.len().saturating_sub(CLOSE_SHOWN);
    format!(
        "; close call, confirm in ngspice: {}{}",
        named.join(", "),
        if more > 0 {
            format!(" and {more} more")
        } else {
            String::new()
        }
    )
}

/// The answer as a Markdown table (the report's head and the command's last lines).
pub fn table(sweep: &Sweep, points: &[PointResult], answers: &[Answer]) -> String {
    let by = |i: usize| points.iter().find(|p| p.index == i);
    let cell = |i: Option<usize>| {
        i.and_then(by)
            .map(describe)
            .unwrap_or_else(|| "none".into())
    };
    let mut s = String::from("| width | fastest | smallest (gate area) | lowest energy |");
    if sweep.target.is_some() {
        s.push_str(" smallest meeting the target |");
    }
    s.push('\n');
    s.push_str("|---|---|---|---|");
    if sweep.target.is_some() {
        s.push_str("---|");
    }
    s.push('\n');
    for a in answers {
        s.push_str(&format!(
            "| {} | {}{} | {} | {} |",
            a.width,
            cell(a.fastest),
            close_text(points, a, describe),
            cell(a.smallest),
            cell(a.lowest_energy)
        ));
        if sweep.target.is_some() {
            s.push_str(&format!(
                " {} |",
                match &a.meets_target {
                    Some((i, _)) => format!("{} (its slowest corner)", cell(Some(*i))),
                    None => format!("none of {} designs", a.designs),
                }
            ));
        }
        s.push('\n');
    }
    s
}
