//! The sweep's HTML report: self-contained (every plot inline), the answer first.

use super::{answer::Answer, label, Outcome, Sweep};

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// `report.html`. `plots`: (file name, SVG text).
pub fn html(sweep: &Sweep, o: &Outcome, answers: &[Answer], plots: &[(String, String)]) -> String {
    let by = |i: usize| o.points.iter().find(|p| p.index == i);
    let cell = |i: Option<usize>| match i.and_then(by) {
        Some(p) => format!(
            "#{} {}<br><small>{} · {:.0} ps · {:.0} um² · {:.0} fJ</small>",
            p.index,
            esc(&label(p)),
            esc(p.title.as_deref().unwrap_or("")),
            p.delay_ps().unwrap_or(0.0),
            p.gate_area_um2.unwrap_or(0.0),
            p.energy_fj.unwrap_or(0.0)
        ),
        None => "none".into(),
    };
    let mut h = String::from("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>Sweep report</title>\n<style>body{font-family:sans-serif;margin:24px;max-width:1100px}table{border-collapse:collapse;margin:12px 0}td,th{border:1px solid #bbb;padding:4px 8px;vertical-align:top;font-size:14px}th{background:#eee}figure{margin:16px 0}small{color:#555}</style></head><body>\n");
    h.push_str("<h1>Sweep report</h1>\n");
    h.push_str(&format!("<p>{}</p>\n", esc(&o.counts_line())));
    h.push_str(&format!(
        "<h2>Which adder</h2>\n<p>{}",
        esc(&super::figures_note(sweep))
    ));
    h.push_str("</p>\n<table><tr><th>width</th><th>fastest</th><th>smallest (gate area)</th><th>lowest energy</th>");
    if sweep.target.is_some() {
        h.push_str("<th>smallest meeting the target</th>");
    }
    h.push_str("</tr>\n");
    for a in answers {
        h.push_str(&format!(
            "<tr><td>{}</td><td>{}{}</td><td>{}</td><td>{}</td>",
            a.width,
            cell(a.fastest),
            esc(&super::answer::close_text(&o.points, a, |p| format!(
                "#{} {} ({:.0} ps)",
                p.index,
                label(p),
                p.delay_ps().unwrap_or(0.0)
            ))),
            cell(a.smallest),
            cell(a.lowest_energy)
        ));
        if sweep.target.is_some() {
            h.push_str(&format!(
                "<td>{}</td>",
                match &a.meets_target {
                    Some((i, _)) => format!("{} (its slowest corner)", cell(Some(*i))),
                    None => format!("none of {} designs", a.designs),
                }
            ));
        }
        h.push_str("</tr>\n");
    }
    h.push_str("</table>\n");
    for (name, svg) in plots {
        h.push_str(&format!(
            "<figure class=\"plot\" id=\"{}\">\n{}\n<figcaption>{}</figcaption></figure>\n",
            esc(name.trim_end_matches(".svg")),
            svg.trim(),
            esc(name)
        ));
    }
    h.push_str("<h2>Every point</h2>\n<table><tr><th>#</th><th>point</th><th>status</th><th>worst path</th><th>area um²</th><th>energy fJ</th><th>ngspice</th></tr>\n");
    for p in &o.points {
        h.push_str(&format!(
            "<tr><td>{}</td><td>{}<br><small>{}</small></td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>\n",
            p.index,
            esc(&label(p)),
            esc(p.title.as_deref().unwrap_or("")),
            if p.ok() {
                "ok".to_string()
            } else {
                format!("{}: {}", esc(&p.status), esc(p.reason.as_deref().unwrap_or("")))
            },
            p.worst_ps
                .map(|x| format!("{x:.1} ps {}", esc(p.worst_path.as_deref().unwrap_or(""))))
                .unwrap_or_default(),
            p.gate_area_um2.map(|x| format!("{x:.1}")).unwrap_or_default(),
            p.energy_fj.map(|x| format!("{x:.1}")).unwrap_or_default(),
            p.sim_worst_ps
                .map(|x| format!("{x:.1} ps ({:+.1} %)", p.sim_error_pct.unwrap_or(0.0)))
                .unwrap_or_default(),
        ));
    }
    h.push_str("</table>\n");
    // Marks, once the page is laid out, how many plots drew something: a headless browser's
    // DOM dump shows it (tests/sweep.rs).
    h.push_str("<script>window.addEventListener('load',function(){var n=0;document.querySelectorAll('figure.plot svg').forEach(function(s){var b=s.getBBox();if(b.width>0&&b.height>0&&s.querySelectorAll('circle,polyline,path,line').length>0)n++;});document.body.setAttribute('data-plots-rendered',String(n));});</script>\n");
    h.push_str("</body></html>\n");
    h
}
