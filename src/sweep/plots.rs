//! The sweep's plots, as SVG text (plotters, SVG backend): delay against width per
//! architecture, delay against gate area with the Pareto front, and the estimate against
//! ngspice's measurement with the y = x line and the ±15 % band.

use super::PointResult;
use plotters::prelude::*;
use std::collections::BTreeMap;

const SIZE: (u32, u32) = (720, 460);

fn arch(p: &PointResult) -> String {
    p.architecture.clone().unwrap_or_else(|| "?".into())
}

fn colour(i: usize) -> RGBColor {
    // A fixed, readable palette (our own order).
    const C: [(u8, u8, u8); 11] = [
        (31, 94, 168),
        (214, 96, 26),
        (44, 140, 62),
        (180, 40, 48),
        (120, 84, 170),
        (120, 80, 60),
        (200, 80, 160),
        (90, 90, 90),
        (150, 150, 20),
        (20, 150, 160),
        (0, 0, 0),
    ];
    let (r, g, b) = C[i % C.len()];
    RGBColor(r, g, b)
}

fn finish(buf: String) -> String {
    // plotters writes no XML declaration; the SVG stands alone as it is.
    buf
}

/// Delay (ns) against width: per architecture, the fastest ok point at each width.
pub fn delay_vs_width(points: &[PointResult]) -> Option<String> {
    let mut series: BTreeMap<String, BTreeMap<usize, f64>> = BTreeMap::new();
    for p in points.iter().filter(|p| p.ok()) {
        let (Some(w), Some(d)) = (p.width, p.delay_ps()) else {
            continue;
        };
        let e = series
            .entry(arch(p))
            .or_default()
            .entry(w)
            .or_insert(f64::INFINITY);
        *e = e.min(d / 1000.0);
    }
    if series.is_empty() {
        return None;
    }
    let xmax = series.values().flat_map(|s| s.keys()).copied().max()? as f64;
    let ymax = series
        .values()
        .flat_map(|s| s.values())
        .copied()
        .fold(0.0, f64::max);
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, SIZE).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let mut chart = ChartBuilder::on(&root)
            .caption(
                "Worst-path delay against width (fastest of each architecture)",
                ("sans-serif", 18),
            )
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(56)
            .build_cartesian_2d(0.0..xmax * 1.05, 0.0..ymax * 1.1)
            .ok()?;
        chart
            .configure_mesh()
            .x_desc("width (bits)")
            .y_desc("delay (ns)")
            .draw()
            .ok()?;
        for (i, (name, s)) in series.iter().enumerate() {
            let c = colour(i);
            let pts: Vec<(f64, f64)> = s.iter().map(|(&w, &d)| (w as f64, d)).collect();
            chart
                .draw_series(LineSeries::new(pts.clone(), c.stroke_width(2)))
                .ok()?
                .label(name.clone())
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 18, y)], c.stroke_width(2))
                });
            chart
                .draw_series(pts.iter().map(|&p| Circle::new(p, 3, c.filled())))
                .ok()?;
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperLeft)
            .background_style(WHITE.mix(0.85))
            .border_style(BLACK)
            .draw()
            .ok()?;
        root.present().ok()?;
    }
    Some(finish(buf))
}

/// The points of one width no other point of that width beats in both area and delay, by
/// increasing area.
pub fn pareto(points: &[PointResult], width: usize) -> Vec<usize> {
    let mut ok: Vec<&PointResult> = points
        .iter()
        .filter(|p| {
            p.ok() && p.width == Some(width) && p.gate_area_um2.is_some() && p.delay_ps().is_some()
        })
        .collect();
    ok.sort_by(|a, b| {
        a.gate_area_um2
            .unwrap()
            .total_cmp(&b.gate_area_um2.unwrap())
            .then(a.delay_ps().unwrap().total_cmp(&b.delay_ps().unwrap()))
    });
    let mut out = vec![];
    let mut best = f64::INFINITY;
    for p in ok {
        let d = p.delay_ps().unwrap();
        if d < best {
            best = d;
            out.push(p.index);
        }
    }
    out
}

/// Delay (ns) against gate area (µm²), every ok point, the Pareto front drawn through.
pub fn delay_vs_area(points: &[PointResult]) -> Option<String> {
    let ok: Vec<&PointResult> = points
        .iter()
        .filter(|p| p.ok() && p.gate_area_um2.is_some() && p.delay_ps().is_some())
        .collect();
    if ok.is_empty() {
        return None;
    }
    let xmax = ok
        .iter()
        .map(|p| p.gate_area_um2.unwrap())
        .fold(0.0, f64::max);
    let ymax = ok
        .iter()
        .map(|p| p.delay_ps().unwrap() / 1000.0)
        .fold(0.0, f64::max);
    let archs: Vec<String> = {
        let mut v: Vec<String> = ok.iter().map(|p| arch(p)).collect();
        v.sort();
        v.dedup();
        v
    };
    let mut widths: Vec<usize> = ok.iter().filter_map(|p| p.width).collect();
    widths.sort_unstable();
    widths.dedup();
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, SIZE).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let mut chart = ChartBuilder::on(&root)
            .caption(
                "Delay against gate area (each width's Pareto front: black lines)",
                ("sans-serif", 18),
            )
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(56)
            .build_cartesian_2d(0.0..xmax * 1.05, 0.0..ymax * 1.1)
            .ok()?;
        chart
            .configure_mesh()
            .x_desc("gate area, sum of W*L (um2)")
            .y_desc("delay (ns)")
            .draw()
            .ok()?;
        for (i, a) in archs.iter().enumerate() {
            let c = colour(i);
            let pts: Vec<(f64, f64)> = ok
                .iter()
                .filter(|p| arch(p) == *a)
                .map(|p| (p.gate_area_um2.unwrap(), p.delay_ps().unwrap() / 1000.0))
                .collect();
            chart
                .draw_series(pts.iter().map(|&p| Circle::new(p, 3, c.filled())))
                .ok()?
                .label(a.clone())
                .legend(move |(x, y)| Circle::new((x + 8, y), 3, c.filled()));
        }
        for &w in &widths {
            let line: Vec<(f64, f64)> = pareto(points, w)
                .iter()
                .filter_map(|&i| points.iter().find(|p| p.index == i))
                .map(|p| (p.gate_area_um2.unwrap(), p.delay_ps().unwrap() / 1000.0))
                .collect();
            chart
                .draw_series(LineSeries::new(line.clone(), BLACK.stroke_width(2)))
                .ok()?;
            chart
                .draw_series(
                    line.iter()
                        .map(|&p| Circle::new(p, 5, BLACK.stroke_width(1))),
                )
                .ok()?;
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperRight)
            .background_style(WHITE.mix(0.85))
            .border_style(BLACK)
            .draw()
            .ok()?;
        root.present().ok()?;
    }
    Some(finish(buf))
}

/// The engine's estimate against ngspice's measurement (ns), with y = x and ±15 %.
pub fn estimate_vs_measured(points: &[PointResult]) -> Option<String> {
    let pts: Vec<(f64, f64)> = points
        .iter()
        .filter_map(|p| Some((p.sim_worst_ps? / 1000.0, p.worst_ps? / 1000.0)))
        .collect();
    if pts.is_empty() {
        return None;
    }
    let m = pts.iter().map(|&(x, y)| x.max(y)).fold(0.0, f64::max) * 1.15;
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, SIZE).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let mut chart = ChartBuilder::on(&root)
            .caption(
                "Timing engine against ngspice (y = x, and the +/-15 % band)",
                ("sans-serif", 18),
            )
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(56)
            .build_cartesian_2d(0.0..m, 0.0..m)
            .ok()?;
        chart
            .configure_mesh()
            .x_desc("ngspice, worst path (ns)")
            .y_desc("estimate (ns)")
            .draw()
            .ok()?;
        let grey = RGBColor(150, 150, 150);
        for (k, style) in [
            (1.0, BLACK.stroke_width(1)),
            (1.15, grey.stroke_width(1)),
            (0.85, grey.stroke_width(1)),
        ] {
            chart
                .draw_series(LineSeries::new(vec![(0.0, 0.0), (m, m * k)], style))
                .ok()?;
        }
        chart
            .draw_series(pts.iter().map(|&p| Circle::new(p, 3, colour(0).filled())))
            .ok()?;
        root.present().ok()?;
    }
    Some(finish(buf))
}

/// The worst path's waveforms (ngspice wrdata: a time and a value column per node), over
/// its window from a little before the input's crossing to after the output's.
pub fn waveforms(dat: &str, names: &[String], window: (f64, f64), title: &str) -> Option<String> {
    let rows: Vec<Vec<f64>> = dat
        .lines()
        .map(|l| {
            l.split_whitespace()
                .filter_map(|x| x.parse().ok())
                .collect()
        })
        .filter(|r: &Vec<f64>| r.len() >= 2 * names.len())
        .collect();
    if rows.is_empty() {
        return None;
    }
    let (a, b) = window;
    let span = (b - a).max(1e-12);
    let (t0, t1) = (a - 0.3 * span, b + 0.5 * span);
    let vmax = rows
        .iter()
        .flat_map(|r| r.iter().skip(1).step_by(2).copied())
        .fold(0.0, f64::max)
        * 1.05;
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, SIZE).into_drawing_area();
        root.fill(&WHITE).ok()?;
        let mut chart = ChartBuilder::on(&root)
            .caption(
                format!("Worst path in ngspice: {title}"),
                ("sans-serif", 16),
            )
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(50)
            .build_cartesian_2d(0.0..(t1 - t0) * 1e9, 0.0..vmax)
            .ok()?;
        chart
            .configure_mesh()
            .x_desc(format!("time from {:.3} ns (ns)", t0 * 1e9))
            .y_desc("volts")
            .draw()
            .ok()?;
        for (i, n) in names.iter().enumerate() {
            let c = colour(i);
            let pts: Vec<(f64, f64)> = rows
                .iter()
                .map(|r| (r[2 * i], r[2 * i + 1]))
                .filter(|&(t, _)| t >= t0 && t <= t1)
                .map(|(t, v)| ((t - t0) * 1e9, v))
                .collect();
            chart
                .draw_series(LineSeries::new(pts, c.stroke_width(2)))
                .ok()?
                .label(n.clone())
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 18, y)], c.stroke_width(2))
                });
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperRight)
            .background_style(WHITE.mix(0.85))
            .border_style(BLACK)
            .draw()
            .ok()?;
        root.present().ok()?;
    }
    Some(buf)
}
