//! `carrywright sweep`: the cross product of a sweep file's lists, refused points recorded
//! not fatal, results reused across runs (an interrupted sweep resumes and ends equal to a
//! clean run), the answer per width, and ngspice runs in parallel.

mod common;

use std::path::Path;
use std::process::Command;

struct Run {
    code: Option<i32>,
    stdout: String,
    stderr: String,
}

fn sweep(dir: &Path, yaml: &str, args: &[&str]) -> Run {
    std::fs::write(dir.join("sweep.yaml"), yaml).unwrap();
    let o = Command::new(env!("CARGO_BIN_EXE_carrywright"))
        .current_dir(dir)
        .args(["sweep", "sweep.yaml", "-o", "out"])
        .args(args)
        .output()
        .unwrap();
    Run {
        code: o.status.code(),
        stdout: String::from_utf8_lossy(&o.stdout).into(),
        stderr: String::from_utf8_lossy(&o.stderr).into(),
    }
}

fn read(dir: &Path, f: &str) -> String {
    std::fs::read_to_string(dir.join("out").join(f)).unwrap()
}

/// Two architectures × two widths × two corners on GF180MCU (the characterised files ship
/// with the tool, so estimates need no simulator).
const SMALL: &str = "base:\n  name: acc\n  width: 8\n  architecture: ripple\n  technology: gf180mcu-3v3\n  testbench: {load: 20f, random: 0}\nvary:\n  width: [8, 16]\n  architecture: [ripple, kogge-stone]\n  corner: [typical, ss]\ntarget: {delay: 2n, margin: 10%}\n";

/// The estimate-only sweep: one CSV row a point in cross-product order, with units in the
/// header; the answer names, per width, the fastest design (Kogge-Stone beats ripple at
/// both widths: log-depth against linear, Kogge & Stone 1973) and the smallest (ripple).
#[test]
fn estimate_only_sweep_writes_rows_and_answers() {
    let dir = tempfile::tempdir().unwrap();
    let r = sweep(dir.path(), SMALL, &["--estimate-only"]);
    assert_eq!(r.code, Some(0), "{}\n{}", r.stdout, r.stderr);
    let csv = read(dir.path(), "results.csv");
    let lines: Vec<&str> = csv.lines().collect();
    assert_eq!(lines.len(), 9, "{csv}");
    assert!(
        lines[0].starts_with("point,hash,width,architecture,corner,status,"),
        "{}",
        lines[0]
    );
    assert!(lines[0].contains("worst_ps") && lines[0].contains("gate_area_um2"));
    // Cross-product order: width slowest, corner fastest.
    assert!(lines[1].contains(",8,ripple,typical,ok,"), "{}", lines[1]);
    assert!(lines[8].contains(",16,kogge-stone,ss,ok,"), "{}", lines[8]);
    let j: serde_json::Value = serde_json::from_str(&read(dir.path(), "results.json")).unwrap();
    let points = j["points"].as_array().unwrap();
    for a in j["answer"].as_array().unwrap() {
        let fastest = &points[a["fastest"].as_u64().unwrap() as usize];
        let smallest = &points[a["smallest"].as_u64().unwrap() as usize];
        assert!(
            fastest["title"].as_str().unwrap().contains("kogge-stone"),
            "{a}"
        );
        assert!(
            smallest["title"].as_str().unwrap().contains("ripple"),
            "{a}"
        );
    }
    let report = read(dir.path(), "report.md");
    assert!(
        report.contains("## Which adder") && report.contains("kogge-stone"),
        "{report}"
    );
    assert!(r.stdout.contains("| 16 |"), "{}", r.stdout);
}

/// Close calls: beside each width's fastest design the answer names every other design at
/// the same conditions whose estimate is within `ESTIMATE_CLOSE` of it, and no other. The
/// list is checked against the CSV's own delays; at 32 bits Han-Carlson (one more logic level
/// than Kogge-Stone, half its black cells: Han & Carlson 1987, from memory) is such a call,
/// while ripple never is (linear against logarithmic depth).
#[test]
fn the_answer_names_the_close_calls_to_the_fastest() {
    use carrywright::sweep::answer::ESTIMATE_CLOSE;
    let dir = tempfile::tempdir().unwrap();
    let yaml = "base:\n  name: acc\n  width: 16\n  architecture: ripple\n  technology: gf180mcu-3v3\n  testbench: {load: 20f, random: 0}\nvary:\n  width: [16, 32]\n  architecture: [ripple, kogge-stone, sklansky, han-carlson, brent-kung, carry-skip]\n  corner: [typical, ss]\n";
    let r = sweep(dir.path(), yaml, &["--estimate-only"]);
    assert_eq!(r.code, Some(0), "{}\n{}", r.stdout, r.stderr);
    let j: serde_json::Value = serde_json::from_str(&read(dir.path(), "results.json")).unwrap();
    let points = j["points"].as_array().unwrap();
    // A point's varied values: a list of [key, value].
    let field = |i: usize, k: &str| {
        points[i]["values"]
            .as_array()
            .unwrap()
            .iter()
            .find(|kv| kv[0] == k)
            .map(|kv| kv[1].as_str().unwrap().to_string())
            .unwrap()
    };
    let mut calls = 0;
    for a in j["answer"].as_array().unwrap() {
        let f = a["fastest"].as_u64().unwrap() as usize;
        let df = points[f]["worst_ps"].as_f64().unwrap();
        let mut want: Vec<usize> = (0..points.len())
            .filter(|&i| {
                i != f
                    && points[i]["width"] == points[f]["width"]
                    && field(i, "corner") == field(f, "corner")
                    && field(i, "architecture") != field(f, "architecture")
                    && points[i]["worst_ps"].as_f64().unwrap() <= df * (1.0 + ESTIMATE_CLOSE)
            })
            .collect();
        want.sort_by(|&x, &y| {
            points[x]["worst_ps"]
                .as_f64()
                .unwrap()
                .total_cmp(&points[y]["worst_ps"].as_f64().unwrap())
        });
        let got: Vec<usize> = a["close_to_fastest"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_u64().unwrap() as usize)
            .collect();
        assert_eq!(got, want, "{a}");
        for &i in &got {
            assert_ne!(field(i, "architecture"), "ripple", "{a}");
        }
        if a["width"] == 32 {
            assert!(
                got.iter()
                    .any(|&i| field(i, "architecture") == "han-carlson"),
                "{a}"
            );
        }
        calls += got.len();
    }
    assert!(calls > 0);
    let report = read(dir.path(), "report.md");
    assert!(
        report.contains("close call, confirm in ngspice: #") && report.contains("han-carlson"),
        "{report}"
    );
    let html = read(dir.path(), "report.html");
    assert!(html.contains("close call, confirm in ngspice"));
}

/// A point the tool refuses (dynamic style on ripple) is recorded with its reason; the
/// sweep goes on. An unknown `vary` key is a sweep-file error: exit 2, the key named.
#[test]
fn refused_points_are_recorded_and_bad_files_refused() {
    let dir = tempfile::tempdir().unwrap();
    let yaml = "base:\n  name: acc\n  width: 8\n  architecture: ripple\nvary:\n  style: [static, dynamic]\n";
    let r = sweep(dir.path(), yaml, &["--estimate-only"]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let csv = read(dir.path(), "results.csv");
    let row = csv.lines().find(|l| l.contains(",dynamic,")).unwrap();
    assert!(
        row.contains(",refused,") && row.contains("dynamic"),
        "{row}"
    );
    let bad = sweep(
        dir.path(),
        "base: {name: a, width: 8}\nvary:\n  colour: [red]\n",
        &["--estimate-only"],
    );
    assert_eq!(bad.code, Some(2));
    assert!(bad.stderr.contains("vary.colour"), "{}", bad.stderr);
}

/// Interrupted after 3 points (`--limit`), then run again: the finished points are reused
/// and the final results equal a clean run's, byte for byte.
#[test]
fn interrupted_sweep_resumes_to_the_clean_result() {
    let clean = tempfile::tempdir().unwrap();
    assert_eq!(
        sweep(clean.path(), SMALL, &["--estimate-only"]).code,
        Some(0)
    );
    let dir = tempfile::tempdir().unwrap();
    let first = sweep(dir.path(), SMALL, &["--estimate-only", "--limit", "3"]);
    assert_eq!(first.code, Some(0));
    let j: serde_json::Value = serde_json::from_str(&read(dir.path(), "results.json")).unwrap();
    assert_eq!(j["points"].as_array().unwrap().len(), 3);
    assert_eq!(j["left"], 5);
    assert_eq!(sweep(dir.path(), SMALL, &["--estimate-only"]).code, Some(0));
    let j: serde_json::Value = serde_json::from_str(&read(dir.path(), "results.json")).unwrap();
    assert_eq!(
        (j["reused"].as_u64(), j["computed"].as_u64()),
        (Some(3), Some(5))
    );
    assert_eq!(
        read(dir.path(), "results.csv"),
        read(clean.path(), "results.csv")
    );
    assert_eq!(
        read(dir.path(), "report.md")
            .lines()
            .skip(3)
            .collect::<Vec<_>>(),
        read(clean.path(), "report.md")
            .lines()
            .skip(3)
            .collect::<Vec<_>>()
    );
}

/// With ngspice (the reference): every point of the small sweep is simulated, its worst
/// path measured within 15 % of its estimate (the engine's accuracy target), and the
/// corner order holds (ss slower than typical) in measurement too.
#[test]
fn ngspice_sweep_measures_every_point() {
    if !common::tools(&["ngspice"]) {
        return;
    }
    if common::model_dir().is_none() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let r = sweep(dir.path(), SMALL, &[]);
    assert_eq!(r.code, Some(0), "{}\n{}", r.stdout, r.stderr);
    let j: serde_json::Value = serde_json::from_str(&read(dir.path(), "results.json")).unwrap();
    let points = j["points"].as_array().unwrap();
    assert_eq!(points.len(), 8);
    for p in points {
        assert_eq!(p["status"], "ok", "{p}");
        let err = p["sim_error_pct"].as_f64().unwrap();
        assert!(err.abs() < 15.0, "{p}");
    }
    let svg = read(dir.path(), "estimate_vs_ngspice.svg");
    roxmltree::Document::parse(&svg).unwrap();
    // The waveforms of the fastest 16-bit point's worst path: one line a node, input first.
    let svg = read(dir.path(), "worst_path_waveforms.svg");
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let lines = doc
        .descendants()
        .filter(|n| n.has_tag_name("polyline"))
        .count();
    assert!(lines >= 3, "{lines} waveforms");
    for pair in points.chunks(2) {
        // Each pair is (typical, ss) of one design.
        assert!(
            pair[1]["sim_worst_ps"].as_f64() > pair[0]["sim_worst_ps"].as_f64(),
            "{pair:?}"
        );
    }
}

/// The plots are SVG that parses as XML (roxmltree) and carries drawn marks; the HTML report
/// embeds them all and renders in a real headless browser (Debian's Chromium): after load,
/// the page's own script counts the plots that laid out with marks in them, and the DOM dump
/// must show every plot counted. A screenshot is kept in target/sweep-report.png.
#[test]
fn report_plots_parse_and_render_in_chromium() {
    let dir = tempfile::tempdir().unwrap();
    assert_eq!(sweep(dir.path(), SMALL, &["--estimate-only"]).code, Some(0));
    let out = dir.path().join("out");
    let mut plots = 0;
    for name in ["delay_vs_width.svg", "delay_vs_area.svg"] {
        let text = std::fs::read_to_string(out.join(name)).unwrap();
        let doc = roxmltree::Document::parse(&text).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert_eq!(doc.root_element().tag_name().name(), "svg");
        let marks = doc
            .descendants()
            .filter(|n| n.has_tag_name("circle"))
            .count();
        assert!(marks >= 4, "{name}: {marks} points drawn");
        plots += 1;
    }
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert_eq!(html.matches("<svg").count(), plots, "every plot inline");
    if !common::tools(&["chromium"]) {
        return;
    }
    let profile = tempfile::tempdir().unwrap();
    let url = format!("file://{}", out.join("report.html").display());
    let flags = [
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--no-first-run",
    ];
    let o = Command::new("chromium")
        .args(flags)
        .arg(format!("--user-data-dir={}", profile.path().display()))
        .arg("--dump-dom")
        .arg(&url)
        .output()
        .unwrap();
    let dom = String::from_utf8_lossy(&o.stdout);
    assert!(
        dom.contains(&format!("data-plots-rendered=\"{plots}\"")),
        "Chromium's DOM: {}",
        dom.chars().take(400).collect::<String>()
    );
    let shot = Path::new(env!("CARGO_MANIFEST_DIR")).join("target/sweep-report.png");
    let o = Command::new("chromium")
        .args(flags)
        .arg(format!("--user-data-dir={}", profile.path().display()))
        .arg(format!("--screenshot={}", shot.display()))
        .arg("--window-size=1200,1600")
        .arg(&url)
        .output()
        .unwrap();
    assert!(
        o.status.success() && shot.is_file(),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert!(
        std::fs::metadata(&shot).unwrap().len() > 10_000,
        "a blank screenshot"
    );
}

/// Export the small sweep as jobs; the results `collect` gathers after the jobs ran equal a
/// local sweep's, byte for byte.
fn jobs_equal_local(run_jobs: impl Fn(&Path)) {
    let local = tempfile::tempdir().unwrap();
    assert_eq!(
        sweep(local.path(), SMALL, &["--estimate-only"]).code,
        Some(0)
    );
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("sweep.yaml"), SMALL).unwrap();
    let o = Command::new(env!("CARGO_BIN_EXE_carrywright"))
        .current_dir(dir.path())
        .args([
            "sweep",
            "sweep.yaml",
            "--export-jobs",
            "jobs",
            "--estimate-only",
        ])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let jobs = dir.path().join("jobs");
    assert!(jobs.join("Makefile").is_file() && jobs.join("slurm.sh").is_file());
    run_jobs(&jobs);
    let o = Command::new(env!("CARGO_BIN_EXE_carrywright"))
        .args(["collect"])
        .arg(&jobs)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert_eq!(
        std::fs::read_to_string(jobs.join("results.csv")).unwrap(),
        read(local.path(), "results.csv")
    );
    // Every job recorded one attempt (none needed its retry here).
    for i in 0..8 {
        let a = std::fs::read_to_string(jobs.join(format!("jobs/{i:04}/attempts"))).unwrap();
        assert_eq!(a.trim(), "1");
    }
}

/// `make -j2` runs the exported jobs on this machine.
#[test]
fn exported_jobs_run_with_make_and_collect() {
    if !common::tools(&["make"]) {
        return;
    }
    jobs_equal_local(|jobs| {
        let o = Command::new("make")
            .args(["-j2", "-s"])
            .current_dir(jobs)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    });
}

/// Stops the one-node cluster by the PIDs its script started.
struct Cluster(std::path::PathBuf);
impl Drop for Cluster {
    fn drop(&mut self) {
        let _ = Command::new("bash")
            .arg(Path::new(env!("CARGO_MANIFEST_DIR")).join("scripts/slurm-one-node.sh"))
            .arg("stop")
            .arg(&self.0)
            .status();
    }
}

/// The Slurm job array runs the exported jobs on a one-node cluster this test starts
/// (scripts/slurm-one-node.sh: Debian's slurm-wlm and munge), each task one point.
#[test]
fn exported_jobs_run_as_a_slurm_array_and_collect() {
    if !common::tools(&["sbatch", "slurmctld", "slurmd", "munged"]) {
        return;
    }
    let conf = tempfile::tempdir().unwrap();
    let start = Command::new("bash")
        .arg(Path::new(env!("CARGO_MANIFEST_DIR")).join("scripts/slurm-one-node.sh"))
        .arg("start")
        .arg(conf.path())
        .output()
        .unwrap();
    let _cluster = Cluster(conf.path().to_path_buf());
    let up = start.status.success();
    if !common::prerequisite(
        up,
        &format!(
            "a one-node Slurm cluster ({})",
            String::from_utf8_lossy(&start.stderr).trim()
        ),
    ) {
        return;
    }
    let slurm_conf = conf.path().join("slurm.conf");
    jobs_equal_local(|jobs| {
        let o = Command::new("timeout")
            .args(["300", "sbatch", "--wait"])
            .arg(jobs.join("slurm.sh"))
            .env("SLURM_CONF", &slurm_conf)
            .output()
            .unwrap();
        assert!(
            o.status.success(),
            "sbatch: {}{}",
            String::from_utf8_lossy(&o.stdout),
            String::from_utf8_lossy(&o.stderr)
        );
    });
}

/// A point at conditions the technology has no characterised timing for (150 degC, above its
/// hottest characterisation, so not interpolated either) has no
/// estimate, but a simulated sweep still measures it: ok, with ngspice's figure and the
/// reason the estimate is missing.
#[test]
fn uncharacterised_conditions_are_still_simulated() {
    if !common::tools(&["ngspice"]) || common::model_dir().is_none() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let yaml = "base: {name: acc, width: 8, architecture: ripple, technology: gf180mcu-3v3, testbench: {load: 10f, random: 0}}\nvary:\n  temp: [150]\n";
    let r = sweep(dir.path(), yaml, &[]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let j: serde_json::Value = serde_json::from_str(&read(dir.path(), "results.json")).unwrap();
    let p = &j["points"][0];
    assert_eq!(p["status"], "ok", "{p}");
    assert!(
        p["worst_ps"].is_null() && p["sim_carry_ps"].as_f64().unwrap() > 0.0,
        "{p}"
    );
    assert!(p["reason"].as_str().unwrap().contains("no estimate"), "{p}");
}
