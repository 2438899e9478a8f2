//! Switch-level evaluation of a cell's transistor schematic, used to check that each cell's
//! transistors compute its logic function. A device conducts when its gate is at the level
//! that turns it on; a node takes the value of the supplies and driven inputs it connects to
//! through conducting devices; keepers are weak (they only hold a node nothing else drives);
//! a node connected to nothing keeps its charge (the precharged value in dynamic cells).

use super::{Cell, Dir, Mos, Role};
use std::collections::HashMap;

/// Node values after the schematic settles, or the name of a node driven both ways.
pub fn settle(
    cell: &Cell,
    inputs: &HashMap<&str, bool>,
    charge: &HashMap<String, bool>,
) -> Result<HashMap<String, bool>, String> {
    let mut names: Vec<String> = vec!["vdd".into(), "vss".into()];
    for p in &cell.pins {
        names.push(p.name.to_string());
    }
    for d in &cell.devices {
        for n in [&d.d, &d.g, &d.s] {
            if !names.contains(n) {
                names.push(n.clone());
            }
        }
    }
    let idx: HashMap<&str, usize> = names
        .iter()
        .enumerate()
        .map(|(i, n)| (n.as_str(), i))
        .collect();
    let n = names.len();
    let mut fixed: Vec<Option<bool>> = vec![None; n];
    fixed[0] = Some(true);
    fixed[1] = Some(false);
    for (k, &v) in inputs {
        fixed[idx[k]] = Some(v);
    }
    let mut val: Vec<Option<bool>> = (0..n)
        .map(|i| fixed[i].or_else(|| charge.get(&names[i]).copied()))
        .collect();
    let devs: Vec<(usize, usize, usize, Mos, bool)> = cell
        .devices
        .iter()
        .map(|d| {
            (
                idx[d.d.as_str()],
                idx[d.g.as_str()],
                idx[d.s.as_str()],
                d.mos,
                d.role == Role::Keeper,
            )
        })
        .collect();
    for _round in 0..4 * n {
        let on = |g: Option<bool>, m: Mos| {
            matches!((m, g), (Mos::N, Some(true)) | (Mos::P, Some(false)))
        };
        let mut next = val.clone();
        let mut seen = vec![false; n];
        for start in 0..n {
            if fixed[start].is_some() || seen[start] {
                continue;
            }
            // Flood the strong component of `start` through conducting devices.
            let mut comp = vec![start];
            let mut stack = vec![start];
            seen[start] = true;
            let (mut hi, mut lo, mut weak_hi) = (false, false, false);
            while let Some(x) = stack.pop() {
                for &(d, g, s, m, weak) in &devs {
                    if !on(val[g], m) || (d != x && s != x) {
                        continue;
                    }
                    let y = if d == x { s } else { d };
                    if let Some(f) = fixed[y] {
                        if weak {
                            weak_hi |= f;
                        } else if f {
                            hi = true;
                        } else {
                            lo = true;
                        }
                    } else if !weak && !seen[y] {
                        seen[y] = true;
                        comp.push(y);
                        stack.push(y);
                    }
                }
            }
            if hi && lo {
                return Err(format!(
                    "node {} is driven high and low at once",
                    names[start]
                ));
            }
            let v = if hi {
                Some(true)
            } else if lo {
                Some(false)
            } else if weak_hi {
                Some(true)
            } else {
                // Floating: charge shared over the component keeps its previous value.
                comp.iter().find_map(|&c| val[c])
            };
            for &c in &comp {
                next[c] = v;
            }
        }
        if next == val {
            return Ok(names
                .iter()
                .zip(val)
                .filter_map(|(nm, v)| v.map(|v| (nm.clone(), v)))
                .collect());
        }
        val = next;
    }
    Err("the schematic does not settle".into())
}

/// Compare a cell's transistors with its logic function on every input combination it is
/// designed for. Dynamic cells are precharged (clock low, chain inputs precharged high) and
/// then evaluated with the precharged charge kept on floating nodes.
pub fn verify(cell: &Cell) -> Result<usize, String> {
    let ins: Vec<usize> = cell.inputs().collect();
    let mut checked = 0;
    for combo in 0u32..(1 << ins.len()) {
        let bit = |pin: usize| {
            let k = ins.iter().position(|&i| i == pin).expect("input pin");
            combo >> k & 1 == 1
        };
        if let Some(care) = &cell.care {
            if !care.eval(&|p| bit(p)) {
                continue;
            }
        }
        let mut inputs: HashMap<&str, bool> =
            ins.iter().map(|&i| (cell.pins[i].name, bit(i))).collect();
        let mut charge = HashMap::new();
        if let Some(clk) = cell.clock {
            if !bit(clk) {
                continue; // the precharge phase is checked inside each evaluate case below
            }
            let mut pre = inputs.clone();
            pre.insert(cell.pins[clk].name, false);
            for p in &cell.pins {
                if p.chain && p.dir == Dir::In {
                    pre.insert(p.name, true);
                }
            }
            charge = settle(cell, &pre, &HashMap::new())?;
            for (out, f) in &cell.logic {
                let want = f.eval(&|p| {
                    if p == clk {
                        false
                    } else {
                        pre[cell.pins[p].name]
                    }
                });
                let name = cell.pins[*out].name;
                if charge.get(name) != Some(&want) {
                    return Err(format!(
                        "{}: precharge gives {name} = {:?}, logic says {want}",
                        cell.base,
                        charge.get(name)
                    ));
                }
            }
            inputs.insert(cell.pins[clk].name, true);
        }
        let got = settle(cell, &inputs, &charge)?;
        for (out, f) in &cell.logic {
            let want = f.eval(&|p| bit(p));
            let name = cell.pins[*out].name;
            if got.get(name) != Some(&want) {
                return Err(format!(
                    "{}: inputs {:?} give {name} = {:?} at switch level, logic says {want}",
                    cell.base,
                    inputs,
                    got.get(name)
                ));
            }
        }
        checked += 1;
    }
    Ok(checked)
}
