//! The `carrywright` command line: a thin layer over the library.
//!
//! Every failure is one `error: ` line on stderr (control characters escaped) and exit code 2
//! (bad input or usage) or 1 (a failed check); a closed or full stdout or stderr never panics.

use carrywright::error::{Error, Result};
use carrywright::spec::{self, escape_controls, shown_path, LoadOptions, Spec};
use carrywright::{emit, sim};
use clap::{Parser, Subcommand};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Most random vectors `check --random` accepts (about a minute of checking on a 128-bit
/// design in a release build).
const RANDOM_MAX: u64 = 100_000_000;
/// `check` runs the switch-level simulator exhaustively up to this width (2^21 vectors).
const SWITCH_EXHAUSTIVE_MAX: usize = 10;
/// `verify` reads netlists up to this size (a 128-bit prefix adder is about 1 MiB).
const NETLIST_MAX_BYTES: u64 = 64 << 20;

/// Generate verified adder netlists (structural Verilog and transistor-level SPICE, each
/// with a testbench) from a short YAML spec.
#[derive(Parser)]
#[command(name = "carrywright", version, about, long_about = None)]
struct Cli {
    /// Print nothing but errors.
    #[arg(short, long, global = true)]
    quiet: bool,
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Build, check and write NAME.v, NAME_tb.v, NAME.sp, NAME_tb.sp and NAME.json into DIR
    /// (with several specs: into DIR/NAME/ for each).
    Generate {
        /// The adder specs (YAML; `-` reads one from standard input).
        #[arg(required = true, value_name = "SPEC")]
        specs: Vec<PathBuf>,
        /// Output folder (created if missing; files are replaced as a whole).
        #[arg(short, long, value_name = "DIR")]
        out: PathBuf,
        /// Write nothing; exit 1 listing the files in DIR that differ from a fresh generation.
        #[arg(long)]
        check: bool,
        /// Folder holding the GF180MCU ngspice models (else $CARRYWRIGHT_MODEL_DIR).
        #[arg(long, value_name = "DIR")]
        model_dir: Option<PathBuf>,
    },
    /// Print what a spec builds (counts by cell kind, topological depth, prefix-graph figures,
    /// and the timing engine's worst path and area when the technology is characterised) and
    /// optionally draw its carry structure as SVG.
    Describe {
        /// The adder spec (YAML; `-` reads it from standard input).
        spec: PathBuf,
        /// Write an SVG drawing of the carry structure here.
        #[arg(long, value_name = "FILE")]
        svg: Option<PathBuf>,
        /// Print one JSON object instead of the table.
        #[arg(long)]
        json: bool,
        /// Folder holding the GF180MCU ngspice models (else $CARRYWRIGHT_MODEL_DIR).
        #[arg(long, value_name = "DIR")]
        model_dir: Option<PathBuf>,
    },
    /// Estimate timing, area and energy from the transistor netlist: the real worst path
    /// (found over input vector pairs) with its path and pair, cin→cout, the topological
    /// bound and the delay to every output.
    Estimate {
        /// The adder spec (YAML).
        spec: PathBuf,
        /// Print one JSON object instead of a table.
        #[arg(long)]
        json: bool,
        /// Folder holding the GF180MCU ngspice models (else $CARRYWRIGHT_MODEL_DIR).
        #[arg(long, value_name = "DIR")]
        model_dir: Option<PathBuf>,
    },
    /// Build the netlist, run its structural checks, a bit-parallel logic check against
    /// native integer addition (exhaustive up to 12 bits, else directed plus random vectors)
    /// and the switch-level check of the SPICE text (exhaustive up to 10 bits).
    Check {
        /// The adder spec (YAML; `-` reads it from standard input).
        spec: PathBuf,
        /// Random vectors above 12 bits (100000 to 100000000).
        #[arg(long, default_value_t = sim::RANDOM_MIN as u64, value_name = "N", value_parser = parse_random)]
        random: u64,
        /// Print one JSON object instead of the table.
        #[arg(long)]
        json: bool,
        /// Folder holding the GF180MCU ngspice models (else $CARRYWRIGHT_MODEL_DIR).
        #[arg(long, value_name = "DIR")]
        model_dir: Option<PathBuf>,
    },
    /// Check a transistor netlist edited by hand against the spec it came from: the
    /// switch-level functional check, a structural comparison with the generated netlist
    /// (devices matched by connectivity; removed, added, rewired devices and every W or L that
    /// differs) and the sizing rules (w_min, l_min, keeper ratio) on the edited sizes. Exit 0
    /// when it adds correctly, 1 when it does not or breaks a rule (or differs in structure
    /// with --strict), 2 on a file it cannot read.
    Verify {
        /// The edited netlist (NAME.sp as written by generate, then edited).
        netlist: PathBuf,
        /// The adder spec the netlist was generated from.
        #[arg(long, value_name = "SPEC")]
        spec: PathBuf,
        /// Structural differences are failures (exit 1), not only reported.
        #[arg(long)]
        strict: bool,
        /// Random vectors above 10 bits (100000 to 100000000).
        #[arg(long, default_value_t = sim::RANDOM_MIN as u64, value_name = "N", value_parser = parse_random)]
        random: u64,
        /// Print one JSON object instead of the report.
        #[arg(long)]
        json: bool,
        /// Folder holding the GF180MCU ngspice models (else $CARRYWRIGHT_MODEL_DIR).
        #[arg(long, value_name = "DIR")]
        model_dir: Option<PathBuf>,
    },
    /// Write the views into DIR, run Icarus Verilog on the Verilog testbench and ngspice on the
    /// deck, and write DIR/NAME.results.json with the measurements beside the timing engine's
    /// estimate. Exit 3 wrong outputs, 4 a failed measurement or no convergence, 5 a
    /// simulator or the models missing, 6 a time-out.
    Simulate {
        /// The adder spec (YAML; `-` reads it from standard input).
        spec: PathBuf,
        /// Output folder for the views, the logs and the results.
        #[arg(short, long, value_name = "DIR", default_value = "out")]
        out: PathBuf,
        /// Process corner to simulate at (overrides the spec's conditions).
        #[arg(long, value_name = "C")]
        corner: Option<String>,
        /// Temperature, degC (overrides the spec's conditions).
        #[arg(long, value_name = "DEG", allow_negative_numbers = true)]
        temp: Option<f64>,
        /// Supply, volts (overrides the spec's conditions).
        #[arg(long, value_name = "V")]
        vdd: Option<f64>,
        /// Wall-clock limit of each simulator run, seconds.
        #[arg(long, value_name = "S", default_value_t = 3600.0)]
        timeout: f64,
        /// Do not run Icarus Verilog.
        #[arg(long)]
        no_icarus: bool,
        /// ngspice threads for the deck (default 1).
        #[arg(long, value_name = "N", value_parser = clap::value_parser!(u16).range(1..=64))]
        threads: Option<u16>,
        /// Do not run ngspice.
        #[arg(long)]
        no_ngspice: bool,
        /// Print NAME.results.json instead of the summary.
        #[arg(long)]
        json: bool,
        /// Folder holding the technology's ngspice models (else its environment variable).
        #[arg(long, value_name = "DIR")]
        model_dir: Option<PathBuf>,
    },
    /// Run a sweep: a base spec and lists of values (width, architecture, style, block,
    /// buffers, sizing, corner, temp, vdd, load), every point estimated (and simulated in
    /// ngspice unless --estimate-only) in parallel; writes DIR/results.csv, results.json and
    /// report.md and prints, per width, the fastest, smallest and lowest-energy design.
    Sweep {
        /// The sweep file (YAML: base, vary, exclude, target).
        sweep: PathBuf,
        /// Output folder (results, report, and points/ with each point's result).
        #[arg(short, long, value_name = "DIR", conflicts_with = "export_jobs")]
        out: Option<PathBuf>,
        /// Write the sweep as jobs into DIR instead (one folder a point, a Makefile and a
        /// Slurm job-array script); `carrywright collect DIR` gathers their results.
        #[arg(long, value_name = "DIR")]
        export_jobs: Option<PathBuf>,
        /// Only the timing engine's estimates; no simulator runs.
        #[arg(long)]
        estimate_only: bool,
        /// Compute at most N new points, then stop (the rest are left for a later run).
        #[arg(long, value_name = "N")]
        limit: Option<usize>,
        /// Wall-clock limit of each simulator run, seconds.
        #[arg(long, value_name = "S", default_value_t = 3600.0)]
        timeout: f64,
        /// Folder holding the technology's ngspice models (else its environment variable).
        #[arg(long, value_name = "DIR")]
        model_dir: Option<PathBuf>,
    },
    /// Run one exported sweep job (a folder `sweep --export-jobs` wrote): writes its
    /// result.json.
    Job {
        /// The job's folder (DIR/jobs/NNNN).
        dir: PathBuf,
        /// Folder holding the technology's ngspice models (else its environment variable).
        #[arg(long, value_name = "DIR")]
        model_dir: Option<PathBuf>,
    },
    /// Gather an exported sweep's job results into the files a local sweep writes.
    Collect {
        /// The folder `sweep --export-jobs` wrote.
        dir: PathBuf,
    },
    /// Print a JSON Schema of the spec, technology or sweep format (all three without a
    /// name), for editors that complete and check YAML.
    Schema {
        /// spec, technology or sweep.
        #[arg(value_parser = ["spec", "technology", "sweep"])]
        format: Option<String>,
    },
    /// Characterise a technology in ngspice (switching resistances, capacitances, pass
    /// devices, ladders, slow-input ramps, switching thresholds, FO4, tau, p_inv) and write a
    /// technology file carrying the timing parameters.
    Characterize {
        /// A built-in technology or a technology .yaml file.
        #[arg(long, value_name = "T")]
        technology: String,
        /// Process corner (a library section the technology lists).
        #[arg(long, value_name = "C")]
        corner: Option<String>,
        /// Temperature, degC (-55 to 175).
        #[arg(long, value_name = "DEG", allow_negative_numbers = true)]
        temp: Option<f64>,
        /// Supply, volts (70 % to 130 % of nominal).
        #[arg(long, value_name = "V")]
        vdd: Option<f64>,
        /// Model folder (else the technology's environment variable).
        #[arg(long, value_name = "DIR")]
        model_dir: Option<PathBuf>,
        /// The technology file to write.
        #[arg(short, long, value_name = "FILE.yaml")]
        out: PathBuf,
    },
}

/// `--random N`: a whole number between the check's minimum and [`RANDOM_MAX`].
fn parse_random(text: &str) -> std::result::Result<u64, String> {
    let lo = sim::RANDOM_MIN as u64;
    let range = format!("expected a whole number of vectors from {lo} to {RANDOM_MAX}");
    match text.trim().parse::<u64>() {
        Ok(n) if (lo..=RANDOM_MAX).contains(&n) => Ok(n),
        Ok(n) => Err(format!("{range}, got {n}")),
        Err(_) => Err(range),
    }
}

/// Where normal output goes: stdout, or nowhere with `--quiet`. Write errors (a closed pipe,
/// a full disk) are ignored: the exit code reports the work, not the terminal.
struct Out {
    quiet: bool,
}

impl Out {
    fn line(&self, text: impl std::fmt::Display) {
        if !self.quiet {
            let _ = writeln!(std::io::stdout(), "{text}");
        }
    }
}

/// One `error: ` line on stderr; a closed or full stderr is ignored.
fn say_error(msg: &str) {
    let _ = writeln!(std::io::stderr(), "error: {}", escape_controls(msg));
}

/// Load a spec from a file, or from standard input for `-` (a relative technology path then
/// resolves from the current folder).
fn load_spec(path: &Path, opts: &LoadOptions) -> Result<Spec> {
    if path.as_os_str() == "-" {
        let text = spec::read_stdin("spec")?;
        spec::parse(&text, spec::STDIN_LABEL, Path::new("."), opts)
    } else {
        spec::load(path, opts)
    }
}

fn run(cli: Cli) -> Result<ExitCode> {
    let out = Out { quiet: cli.quiet };
    match cli.command {
        Command::Generate {
            specs,
            out: dir,
            check,
            model_dir,
        } => generate(&out, &specs, &dir, check, LoadOptions { model_dir }),
        Command::Describe {
            spec,
            svg,
            json,
            model_dir,
        } => {
            let s = load_spec(&spec, &LoadOptions { model_dir })?;
            let (design, keepers) = carrywright::build_checked(&s)?;
            // The drawing is written first, so a failure prints nothing on stdout.
            if let Some(path) = &svg {
                let text = emit::report::svg(&s, &design)?;
                carrywright::write_file(path, &text)?;
            }
            // The timing engine's figures, where the technology has characterised timing.
            let est = match &s.technology.timing {
                Some(_) => Some(carrywright::timing::engine::estimate(&s, &design)?),
                None => None,
            };
            if json {
                out.line(describe_json(&s, &design, est.as_ref()));
            } else {
                out.line(emit::report::table(&s, &design).trim_end());
                match &est {
                    Some(e) => out.line(describe_timing(e)),
                    None => out.line(format!(
                        "  (no timing: {} has no characterised timing at these conditions)",
                        s.technology.name
                    )),
                }
                if let Some(k) = &keepers {
                    out.line(describe_keepers(k));
                }
                if let Some(path) = &svg {
                    out.line(format!("  wrote {}", shown_path(path)));
                }
            }
            Ok(ExitCode::SUCCESS)
        }
        Command::Estimate {
            spec,
            json,
            model_dir,
        } => {
            let s = load_spec(&spec, &LoadOptions { model_dir })?;
            let design = carrywright::build(&s)?;
            let e = carrywright::timing::engine::estimate(&s, &design)?;
            out.line(carrywright::timing::search::render(&e, json).trim_end());
            Ok(ExitCode::SUCCESS)
        }
        Command::Check {
            spec,
            random,
            json,
            model_dir,
        } => {
            let s = load_spec(&spec, &LoadOptions { model_dir })?;
            let design = carrywright::build(&s)?;
            let c = emit::summary::counts(&design);
            let random = usize::try_from(random)
                .map_err(|_| Error::Input(format!("--random: {random} is too many here")))?;
            let r = sim::check(&design, s.testbench.seed, random, sim::EXHAUSTIVE_MAX)?;
            // The transistor view, parsed back from its SPICE text and simulated as switches:
            // exhaustive up to SWITCH_EXHAUSTIVE_MAX bits, else the logic check's vectors.
            let label = format!("{}.sp", s.name);
            let text = emit::spice::subcircuits(&s, &design)?;
            let sw = carrywright::switch::check_text(
                &text,
                &label,
                &design,
                &s.technology,
                s.testbench.seed,
                random,
                SWITCH_EXHAUSTIVE_MAX,
            )?;
            let how = if r.exhaustive {
                "exhaustive".to_string()
            } else {
                format!("directed + random, seed {}", s.testbench.seed)
            };
            let phases = if r.precharge_checked {
                ", precharge and evaluate"
            } else {
                ""
            };
            if json {
                out.line(serde_json::json!({
                    "name": s.name,
                    "title": emit::title(&s),
                    "transistors": c.transistors,
                    "cells": c.cells,
                    "cells_by_kind": c.cells_by_kind,
                    "structure": "ok",
                    "logic": {
                        "ok": r.mismatches == 0,
                        "vectors": r.vectors,
                        "exhaustive": r.exhaustive,
                        "seed": s.testbench.seed,
                        "precharge_checked": r.precharge_checked,
                        "mismatches": r.mismatches,
                        "first_mismatch": r.first_mismatch,
                    },
                    "switch_level": sw,
                }));
            } else {
                out.line(format!("{}: {}", s.name, emit::title(&s)));
                out.line(format!("  {:<12} {:>12}", "transistors", c.transistors));
                out.line(format!("  {:<12} {:>12}", "cells", c.cells));
                for (k, n) in &c.cells_by_kind {
                    out.line(format!("    {:<10} {:>12}", k, n));
                }
                out.line(format!(
                    "  {:<12} {:>12}   one driver per net, no floating input, keeper check",
                    "structure", "ok"
                ));
            }
            let sw_how = if sw.exhaustive {
                "exhaustive".to_string()
            } else {
                format!("directed + random, seed {}", s.testbench.seed)
            };
            let mut failed_any = false;
            if r.mismatches == 0 {
                if !json {
                    out.line(format!(
                        "  {:<12} {:>12}   {} vectors ({how}{phases}) against a + b + cin",
                        "logic", "ok", r.vectors
                    ));
                }
            } else {
                failed_any = true;
                let failed = format!(
                    "{} wrong output bits over {} vectors; first: {}",
                    r.mismatches,
                    r.vectors,
                    r.first_mismatch.clone().unwrap_or_default()
                );
                if !json {
                    out.line(format!("  {:<12} {:>12}   {failed}", "logic", "FAILED"));
                }
                if cli.quiet {
                    say_error(&format!("{}: logic check failed: {failed}", s.name));
                }
            }
            match &sw.first_failure {
                None => {
                    if !json {
                        out.line(format!(
                            "  {:<12} {:>12}   {} vectors ({sw_how}{phases}) on the transistors of {label}, as switches",
                            "switch-level", "ok", sw.vectors
                        ));
                    }
                }
                Some(f) => {
                    failed_any = true;
                    let failed = format!(
                        "{} wrong output bits over {} vectors; first: {}",
                        sw.wrong_bits, sw.vectors, f.message
                    );
                    if !json {
                        out.line(format!(
                            "  {:<12} {:>12}   {failed}",
                            "switch-level", "FAILED"
                        ));
                    }
                    if cli.quiet {
                        say_error(&format!("{}: switch-level check failed: {failed}", s.name));
                    }
                }
            }
            Ok(if failed_any {
                ExitCode::from(1)
            } else {
                ExitCode::SUCCESS
            })
        }
        Command::Verify {
            netlist,
            spec,
            strict,
            random,
            json,
            model_dir,
        } => {
            let s = load_spec(&spec, &LoadOptions { model_dir })?;
            let design = carrywright::build(&s)?;
            let label = shown_path(&netlist);
            let text = spec::read_source_capped(&netlist, "netlist", NETLIST_MAX_BYTES)?;
            let reference = emit::spice::subcircuits(&s, &design)?;
            let random = usize::try_from(random)
                .map_err(|_| Error::Input(format!("--random: {random} is too many here")))?;
            let opts = carrywright::switch::verify::Options {
                strict,
                random,
                exhaustive_max: SWITCH_EXHAUSTIVE_MAX,
            };
            let v =
                carrywright::switch::verify::verify(&text, &label, &s, &design, &reference, &opts)?;
            if json {
                out.line(serde_json::to_string_pretty(&v).expect("serialisable"));
            } else {
                for l in v.render().lines() {
                    out.line(l);
                }
            }
            if cli.quiet && v.exit_code != 0 {
                let why = match &v.switch_level.first_failure {
                    Some(f) => format!("does not add: {}", f.message),
                    None => match v.broken_rules.first() {
                        Some(b) => format!("{}: {}", b.rule, b.message),
                        None => "differs in structure from the generated netlist (--strict)".into(),
                    },
                };
                say_error(&format!("{label}: {why}"));
            }
            Ok(ExitCode::from(v.exit_code as u8))
        }
        Command::Simulate {
            spec,
            out: dir,
            corner,
            temp,
            vdd,
            timeout,
            no_icarus,
            threads,
            no_ngspice,
            json,
            model_dir,
        } => {
            if !(timeout.is_finite() && timeout > 0.0 && timeout <= 1e6) {
                return Err(Error::Input(format!(
                    "--timeout: expected seconds above 0 and at most 1000000, got {timeout}"
                )));
            }
            let mut s = load_spec(&spec, &LoadOptions { model_dir })?;
            let c = carrywright::tech::Conditions { corner, temp, vdd };
            s.technology
                .apply_conditions(&c)
                .map_err(|(k, m)| Error::Input(format!("--{k}: {m}")))?;
            let g = carrywright::generate(&s)?;
            carrywright::write_outputs(&dir, &g.files)?;
            let o = carrywright::simulate::Options {
                icarus: !no_icarus,
                ngspice: !no_ngspice,
                timeout: std::time::Duration::from_secs_f64(timeout),
                threads: threads.map(usize::from),
                ..Default::default()
            };
            let r = carrywright::simulate::simulate(&s, g.estimate.as_ref(), &dir, &o)?;
            let text = serde_json::to_string_pretty(&r)
                .map_err(|e| Error::Output(format!("results: {e}")))?;
            carrywright::write_file(
                &dir.join(format!("{}.results.json", s.name)),
                &(text.clone() + "\n"),
            )?;
            if json {
                out.line(text);
            } else {
                out.line(carrywright::simulate::summary(&r, &shown_path(&dir)));
            }
            if r.exit_code != 0 {
                if let Some(f) = &r.failure {
                    say_error(&format!("{}: {f}", s.name));
                }
            }
            Ok(ExitCode::from(r.exit_code))
        }
        Command::Sweep {
            sweep,
            out: dir,
            export_jobs,
            estimate_only,
            limit,
            timeout,
            model_dir,
        } => {
            if !(timeout.is_finite() && timeout > 0.0 && timeout <= 1e6) {
                return Err(Error::Input(format!(
                    "--timeout: expected seconds above 0 and at most 1000000, got {timeout}"
                )));
            }
            let sw = carrywright::sweep::Sweep::load(&sweep)?;
            let o = carrywright::sweep::Options {
                estimate_only,
                limit,
                timeout: std::time::Duration::from_secs_f64(timeout),
                load: LoadOptions { model_dir },
                progress: !cli.quiet,
            };
            if let Some(jobs) = export_jobs {
                let exe = std::env::current_exe()
                    .map_err(|e| Error::Output(format!("cannot find this program: {e}")))?;
                let n = carrywright::sweep::jobs::export(&sw, &jobs, &o, &exe)?;
                out.line(format!(
                    "wrote {n} jobs into {}/jobs, {0}/Makefile (make -j N) and {0}/slurm.sh (sbatch); then carrywright collect {0}",
                    shown_path(&jobs)
                ));
                return Ok(ExitCode::SUCCESS);
            }
            let Some(dir) = dir else {
                return Err(Error::Input(
                    "sweep: give -o DIR (run here) or --export-jobs DIR (write jobs)".into(),
                ));
            };
            let outcome = carrywright::sweep::run(&sw, &dir, &o)?;
            print_sweep(&out, &sw, &outcome, &dir)
        }
        Command::Job { dir, model_dir } => {
            let r = carrywright::sweep::jobs::run_job(&dir, &LoadOptions { model_dir })?;
            out.line(format!(
                "job {}: {}{}",
                r.index,
                r.status,
                r.reason.map(|m| format!(": {m}")).unwrap_or_default()
            ));
            Ok(ExitCode::SUCCESS)
        }
        Command::Schema { format } => {
            let v = match format.as_deref() {
                Some("spec") => carrywright::schema::spec(),
                Some("technology") => carrywright::schema::technology(),
                Some("sweep") => carrywright::schema::sweep(),
                _ => carrywright::schema::all(),
            };
            out.line(serde_json::to_string_pretty(&v).unwrap_or_default());
            Ok(ExitCode::SUCCESS)
        }
        Command::Collect { dir } => {
            let (sw, outcome) = carrywright::sweep::jobs::collect(&dir)?;
            print_sweep(&out, &sw, &outcome, &dir)
        }
        Command::Characterize {
            technology,
            corner,
            temp,
            vdd,
            model_dir,
            out: file,
        } => {
            let r = carrywright::timing::characterize::run(
                &carrywright::timing::characterize::Options {
                    technology,
                    corner,
                    temp,
                    vdd,
                    model_dir,
                    out: file.clone(),
                },
            )?;
            let cpu = r
                .ngspice_cpu_s
                .map(|c| format!("{c:.1} s"))
                .unwrap_or_else(|| "not reported".into());
            out.line(format!("wrote {} (ngspice CPU {cpu})", file.display()));
            Ok(ExitCode::SUCCESS)
        }
    }
}

/// A sweep's files and its closing lines (the answer table).
fn print_sweep(
    out: &Out,
    sw: &carrywright::sweep::Sweep,
    outcome: &carrywright::sweep::Outcome,
    dir: &Path,
) -> Result<ExitCode> {
    let (answers, plots) = carrywright::sweep::write_results(sw, outcome, dir)?;
    let bad = outcome.points.iter().filter(|p| !p.ok()).count();
    out.line(format!(
        "{} points ({} computed, {} reused{}), {} not ok; {:.1} s",
        outcome.points.len(),
        outcome.computed,
        outcome.reused,
        if outcome.left > 0 {
            format!(", {} left: run again to finish", outcome.left)
        } else {
            String::new()
        },
        bad,
        outcome.wall_s
    ));
    out.line(carrywright::sweep::answer::table(sw, &outcome.points, &answers).trim_end());
    out.line(format!(
        "wrote {}/results.csv, results.json, report.md, report.html and {plots} plots",
        shown_path(dir)
    ));
    Ok(ExitCode::SUCCESS)
}

/// `describe --json`: the facts of the table as one object.
fn describe_json(
    s: &Spec,
    design: &carrywright::netlist::Design,
    est: Option<&carrywright::timing::engine::Estimate>,
) -> String {
    let c = emit::summary::counts(design);
    let timing = est.map(|e| {
        serde_json::json!({
            "worst_ps": e.worst_ps,
            "worst_from": e.worst_vectors.from,
            "worst_to": e.worst_vectors.to,
            "cin_cout_ps": e.cin_cout_ps,
            "bound_ps": e.bound_ps,
            "gate_area_um2": e.gate_area_um2,
            "energy_fj": e.energy_fj,
        })
    });
    serde_json::json!({
        "name": s.name,
        "title": emit::title(s),
        "width": s.width,
        "architecture": s.architecture,
        "style": s.style,
        "counts": c,
        "block_rule": s.block_rule,
        "block": s.block,
        "block_sizes": s.block_sizes,
        "buffers": s.buffers.positions,
        "prefix": design.prefix,
        "timing": timing,
    })
    .to_string()
}

/// `describe`'s timing rows: the engine's worst path, cin -> cout, the bound and the area.
fn describe_timing(e: &carrywright::timing::engine::Estimate) -> String {
    let row = |k: &str, v: String| format!("  {k:<22} {v}");
    let mut rows = vec![row(
        "worst path",
        format!(
            "{:.1} ps, {} -> {} (timing engine; carrywright estimate shows the path and the vector pair)",
            e.worst_ps, e.worst_vectors.from, e.worst_vectors.to
        ),
    )];
    if let Some(c) = e.cin_cout_ps {
        rows.push(row(
            "cin -> cout",
            format!("{c:.1} ps, every bit propagating"),
        ));
    }
    rows.push(row(
        "topological bound",
        format!("{:.1} ps (sensitisation ignored)", e.bound_ps),
    ));
    rows.push(row(
        "gate area",
        format!("{:.1} um2 (sum of W*L)", e.gate_area_um2),
    ));
    rows.join("\n")
}

/// `describe`'s keeper row: the slow corner, the slowest front against its limit, and the
/// smallest holding margin.
fn describe_keepers(k: &carrywright::timing::keeper::Report) -> String {
    let slowest = k
        .fronts
        .iter()
        .filter_map(|f| f.duration_ps())
        .fold(0.0, f64::max);
    let mut v = format!(
        "passes at {}: slowest discharge front {:.2} ns in {} segments (limit {:.2} ns)",
        k.slow_corner,
        slowest * 1e-3,
        k.fronts.len(),
        k.limit_ps * 1e-3
    );
    let margin = k
        .holds
        .iter()
        .map(|h| h.keeper_ua / h.leakage_ua)
        .fold(f64::INFINITY, f64::min);
    if let (Some(c), true) = (&k.leaky_corner, margin.is_finite()) {
        v.push_str(&format!(
            "; keepers hold {margin:.0}x their node's leakage at {c}"
        ));
    }
    format!("  {:<22} {v}", "keeper check")
}

/// `generate`: every spec is loaded, validated, built and checked in memory before anything
/// is written, so one bad spec leaves every output folder untouched.
fn generate(
    out: &Out,
    specs: &[PathBuf],
    dir: &Path,
    check: bool,
    opts: LoadOptions,
) -> Result<ExitCode> {
    if specs.iter().filter(|p| p.as_os_str() == "-").count() > 1 {
        return Err(Error::Input(
            "standard input (`-`) can be given only once".into(),
        ));
    }
    let mut loaded: Vec<(Spec, &PathBuf)> = Vec::new();
    for p in specs {
        let s = load_spec(p, &opts)?;
        if let Some((_, first)) = loaded.iter().find(|(o, _)| o.name == s.name) {
            return Err(Error::Input(format!(
                "{} and {} are both named `{}`; each spec written in one run needs its own name",
                shown_path(first),
                shown_path(p),
                s.name
            )));
        }
        loaded.push((s, p));
    }
    let several = loaded.len() > 1;
    let mut jobs = Vec::new();
    for (s, _) in loaded {
        let g = carrywright::generate(&s)?;
        let into = if several {
            dir.join(&s.name)
        } else {
            dir.to_path_buf()
        };
        jobs.push((s, g, into));
    }
    if check {
        let mut stale = Vec::new();
        let mut total = 0;
        for (s, g, into) in &jobs {
            total += g.files.len();
            for f in carrywright::stale_files(into, &g.files)? {
                stale.push(if several {
                    format!("{}/{f}", s.name)
                } else {
                    f
                });
            }
        }
        if stale.is_empty() {
            out.line(format!("{}: up to date ({total} files)", shown_path(dir)));
            return Ok(ExitCode::SUCCESS);
        }
        let line = format!("{}: stale: {}", shown_path(dir), stale.join(" "));
        if out.quiet {
            say_error(&line);
        }
        out.line(line);
        return Ok(ExitCode::from(1));
    }
    for (_, g, into) in &jobs {
        carrywright::write_outputs(into, &g.files)?;
    }
    for (s, g, into) in &jobs {
        let c = &g.counts;
        out.line(format!("{}: {}", s.name, emit::title(s)));
        out.line(format!(
            "  {} transistors, {} cells; logic check passed on {} vectors{}",
            c.transistors,
            c.cells,
            g.check.vectors,
            if g.check.exhaustive {
                " (exhaustive)"
            } else {
                ""
            }
        ));
        if let Some(sw) = &g.switch {
            out.line(format!(
                "  switch-level check of {}.sp passed on {} vectors ({} transistors, {} stages{})",
                s.name,
                sw.vectors,
                sw.transistors,
                sw.stages,
                if sw.phases == 2 {
                    ", precharge and evaluate"
                } else {
                    ""
                }
            ));
        }
        if let Some(e) = &g.estimate {
            out.line(format!(
                "  worst path {:.0} ps ({} -> {}), timing engine estimate; the deck measures it",
                e.worst_ps, e.worst_vectors.from, e.worst_vectors.to
            ));
        }
        if let Some(why) = &g.estimate_failed {
            eprintln!("warning: {}: {}", s.name, why.escape_debug());
        }
        for (name, _) in &g.files {
            out.line(format!("  wrote {}", shown_path(&into.join(name))));
        }
    }
    Ok(ExitCode::SUCCESS)
}

/// A command-line error as one line: the first paragraph of clap's message with its lines
/// joined. Values echoed by clap are shown with control characters escaped (the arguments
/// are parsed again with them escaped, to get the same message about printable text).
fn usage_error(e: &clap::Error, args: &[std::ffi::OsString]) -> String {
    let escaped: Vec<String> = args
        .iter()
        .map(|a| escape_controls(&a.to_string_lossy()))
        .collect();
    let text = match Cli::try_parse_from(&escaped) {
        Err(again) if again.kind() == e.kind() => again.render().to_string(),
        _ => e.render().to_string(),
    };
    let text = text.trim_start_matches("error: ");
    let first = text.split("\n\n").next().unwrap_or(text);
    let joined: Vec<&str> = first
        .lines()
        .map(str::trim)
        .filter(|l| !l.is_empty())
        .collect();
    joined.join(" ")
}

fn main() -> ExitCode {
    // Worker threads never take SIGINT/SIGTERM/SIGHUP: the main thread does, so a deferred
    // write sees them at its next step (output::block_deferred_signals).
    // The workers inherit the blocked mask from this thread as they are created; the start
    // handler blocks them again in case a pool is ever built lazily elsewhere.
    carrywright::output::block_deferred_signals();
    let _ = rayon::ThreadPoolBuilder::new()
        .start_handler(|_| carrywright::output::block_deferred_signals())
        .build_global();
    carrywright::output::unblock_deferred_signals();
    let args: Vec<std::ffi::OsString> = std::env::args_os().collect();
    let cli = match Cli::try_parse_from(&args) {
        Ok(cli) => cli,
        Err(e) => {
            use clap::error::ErrorKind;
            if matches!(e.kind(), ErrorKind::DisplayHelp | ErrorKind::DisplayVersion) {
                let _ = e.print();
                return ExitCode::SUCCESS;
            }
            if e.kind() == ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand {
                say_error("no command given: use generate, describe or check (see --help)");
            } else {
                say_error(&usage_error(&e, &args));
            }
            return ExitCode::from(2);
        }
    };
    match run(cli) {
        Ok(code) => code,
        Err(e) => {
            say_error(e.message());
            ExitCode::from(e.exit_code() as u8)
        }
    }
}
