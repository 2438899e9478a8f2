//! The `carrywright` command line: a thin layer over the library.

use carrywright::error::{Error, Result};
use carrywright::spec::{self, LoadOptions};
use carrywright::{emit, sim};
use clap::{Parser, Subcommand};
use std::path::PathBuf;
use std::process::ExitCode;

/// Generate verified adder netlists (structural Verilog and transistor-level SPICE, each
/// with a testbench) from a short YAML spec.
#[derive(Parser)]
#[command(name = "carrywright", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Build, check and write NAME.v, NAME_tb.v, NAME.sp, NAME_tb.sp and NAME.json into DIR.
    Generate {
        /// The adder spec (YAML).
        spec: PathBuf,
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
    /// Print what a spec builds (counts by cell kind, logic depth, prefix-graph figures) and
    /// optionally draw its carry structure as SVG.
    Describe {
        /// The adder spec (YAML).
        spec: PathBuf,
        /// Write an SVG drawing of the carry structure here.
        #[arg(long, value_name = "FILE")]
        svg: Option<PathBuf>,
        /// Folder holding the GF180MCU ngspice models (else $CARRYWRIGHT_MODEL_DIR).
        #[arg(long, value_name = "DIR")]
        model_dir: Option<PathBuf>,
    },
    /// Build the netlist, run its structural checks and a bit-parallel logic check against
    /// native integer addition (exhaustive up to 12 bits, else directed plus random vectors).
    Check {
        /// The adder spec (YAML).
        spec: PathBuf,
        /// Random vectors above 12 bits (at least 100000).
        #[arg(long, default_value_t = sim::RANDOM_MIN, value_name = "N")]
        random: usize,
        /// Folder holding the GF180MCU ngspice models (else $CARRYWRIGHT_MODEL_DIR).
        #[arg(long, value_name = "DIR")]
        model_dir: Option<PathBuf>,
    },
}

/// Print to stdout, ignoring a closed pipe (`carrywright check x | head`).
macro_rules! say {
    ($($t:tt)*) => {{
        use std::io::Write;
        let _ = writeln!(std::io::stdout(), $($t)*);
    }};
}

fn run(cli: Cli) -> Result<ExitCode> {
    match cli.command {
        Command::Generate {
            spec,
            out,
            check,
            model_dir,
        } => {
            let s = spec::load(&spec, &LoadOptions { model_dir })?;
            let g = carrywright::generate(&s)?;
            if check {
                let stale = carrywright::stale_files(&out, &g.files)?;
                if stale.is_empty() {
                    say!("{}: up to date ({} files)", out.display(), g.files.len());
                    return Ok(ExitCode::SUCCESS);
                }
                say!("{}: stale: {}", out.display(), stale.join(" "));
                return Ok(ExitCode::from(1));
            }
            carrywright::write_outputs(&out, &g.files)?;
            let c = &g.counts;
            say!("{}: {}", s.name, emit::title(&s));
            say!(
                "  {} transistors, {} cells; logic check passed on {} vectors{}",
                c.transistors,
                c.cells,
                g.check.vectors,
                if g.check.exhaustive {
                    " (exhaustive)"
                } else {
                    ""
                }
            );
            for (name, _) in &g.files {
                say!("  wrote {}", out.join(name).display());
            }
            Ok(ExitCode::SUCCESS)
        }
        Command::Describe {
            spec,
            svg,
            model_dir,
        } => {
            let s = spec::load(&spec, &LoadOptions { model_dir })?;
            let design = carrywright::build(&s)?;
            if let Some(path) = svg {
                let text = emit::report::svg(&s, &design)?;
                carrywright::write_file(&path, &text)?;
                say!("{}", emit::report::table(&s, &design).trim_end());
                say!("  wrote {}", path.display());
            } else {
                say!("{}", emit::report::table(&s, &design).trim_end());
            }
            Ok(ExitCode::SUCCESS)
        }
        Command::Check {
            spec,
            random,
            model_dir,
        } => {
            if random < sim::RANDOM_MIN {
                return Err(Error::Input(format!(
                    "--random: at least {} vectors, got {random}",
                    sim::RANDOM_MIN
                )));
            }
            let s = spec::load(&spec, &LoadOptions { model_dir })?;
            let design = carrywright::build(&s)?;
            let c = emit::summary::counts(&design);
            say!("{}: {}", s.name, emit::title(&s));
            say!("  {:<12} {:>12}", "transistors", c.transistors);
            say!("  {:<12} {:>12}", "cells", c.cells);
            for (k, n) in &c.cells_by_kind {
                say!("    {:<10} {:>12}", k, n);
            }
            say!(
                "  {:<12} {:>12}   one driver per net, no floating input, ratio rule",
                "structure",
                "ok"
            );
            let r = sim::check(&design, s.testbench.seed, random, sim::EXHAUSTIVE_MAX)?;
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
            if r.mismatches == 0 {
                say!(
                    "  {:<12} {:>12}   {} vectors ({how}{phases}) against a + b + cin",
                    "logic",
                    "ok",
                    r.vectors
                );
                Ok(ExitCode::SUCCESS)
            } else {
                say!(
                    "  {:<12} {:>12}   {} wrong output bits over {} vectors; first: {}",
                    "logic",
                    "FAILED",
                    r.mismatches,
                    r.vectors,
                    r.first_mismatch.unwrap_or_default()
                );
                Ok(ExitCode::from(1))
            }
        }
    }
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match run(cli) {
        Ok(code) => code,
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::from(e.exit_code() as u8)
        }
    }
}
