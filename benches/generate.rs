//! Timing figures for carrywright: in-process generation of a 64-bit Manchester adder, the
//! bit-parallel logic check and the raw evaluator on a 64-bit ripple adder, and the same
//! vectors run through Icarus Verilog. It measures and prints; it asserts nothing about speed.
//!
//! Besides the readable report, each headline figure is printed once as a tab-separated
//! `FIGURE` line (label, value, target, verdict), which `scripts/bench.sh` gathers into its
//! closing table. Single-threaded throughout.

use carrywright::emit::vectors::{self, Rng, Vector};
use carrywright::emit::{self, spice, summary, verilog};
use carrywright::netlist::Design;
use carrywright::sim::{self, Evaluator};
use carrywright::spec::{self, Spec};
use std::hint::black_box;
use std::path::Path;
use std::process::Command;
use std::time::{Duration, Instant};

const M64: &str =
    "name: m64\nwidth: 64\narchitecture: manchester\nstyle: static\nblock: 4\nbuffers: {every: 8}\n";
const R64: &str = "name: r64\nwidth: 64\narchitecture: ripple\n";

/// Random vectors for the check-throughput figure.
const N_CHECK: usize = 2_000_000;
/// Random vectors run through both Icarus and the internal evaluator.
const N_ICARUS: usize = 100_000;
/// Runs of `vvp -n` (median taken).
const VVP_RUNS: usize = 3;

const GEN_TARGET_MS: f64 = 10.0;
const CHECK_TARGET_PER_S: f64 = 10e6;
const RATIO_TARGET: f64 = 100.0;

fn parse(text: &str) -> Spec {
    spec::parse(text, "bench", Path::new("."), &Default::default()).expect("bench spec parses")
}

struct Stats {
    median: Duration,
    min: Duration,
    runs: usize,
}

impl Stats {
    fn from(mut t: Vec<Duration>) -> Stats {
        t.sort();
        let n = t.len();
        let median = if n % 2 == 1 {
            t[n / 2]
        } else {
            (t[n / 2 - 1] + t[n / 2]) / 2
        };
        Stats {
            median,
            min: t[0],
            runs: n,
        }
    }
}

/// Run `f` `warmup` times untimed, then `runs` times timed one by one.
fn measure<T>(warmup: usize, runs: usize, mut f: impl FnMut() -> T) -> Stats {
    for _ in 0..warmup {
        black_box(f());
    }
    let t = (0..runs)
        .map(|_| {
            let s = Instant::now();
            black_box(f());
            s.elapsed()
        })
        .collect();
    Stats::from(t)
}

fn ms(d: Duration) -> f64 {
    d.as_secs_f64() * 1e3
}

/// A rate per second, for printing.
fn mps(rate: f64) -> String {
    if rate >= 1e6 {
        format!("{:.2} M/s", rate / 1e6)
    } else {
        format!("{:.1} k/s", rate / 1e3)
    }
}

fn verdict(met: bool) -> &'static str {
    if met {
        "met"
    } else {
        "MISSED"
    }
}

/// One row of the closing table in scripts/bench.sh.
fn figure(label: &str, value: &str, target: &str, verdict: &str) {
    println!("FIGURE\t{label}\t{value}\t{target}\t{verdict}");
}

fn line(label: &str, s: &Stats) {
    println!(
        "  {label:<40} median {:>9.3} ms   min {:>9.3} ms   ({} runs)",
        ms(s.median),
        ms(s.min),
        s.runs
    );
}

/// Sections to run: every argument that is not a flag names one (`generate`, `check`,
/// `icarus`); none given runs all. `cargo bench --bench generate -- generate`.
fn main() {
    let picked: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| !a.starts_with('-'))
        .collect();
    let run = |name: &str| picked.is_empty() || picked.iter().any(|p| p == name);
    println!(
        "carrywright bench ({}; generate runs its three checks on two threads, the other figures one)",
        build_kind()
    );
    println!(
        "  load average at start: {} ({} CPUs)",
        loadavg(),
        std::thread::available_parallelism().map_or(0, |n| n.get())
    );
    if run("generate") {
        bench_generate();
    }
    if run("check") {
        bench_check();
    }
    if run("icarus") {
        bench_icarus();
    }
    if run("architectures") {
        bench_architectures();
    }
    if run("estimate") {
        bench_estimate();
    }
    if run("switch") {
        bench_switch();
    }
    println!();
    println!("  load average at end: {}", loadavg());
}

/// Other work on the machine skews every figure; print it alongside them.
fn loadavg() -> String {
    std::fs::read_to_string("/proc/loadavg")
        .map(|s| s.split_whitespace().take(3).collect::<Vec<_>>().join(" "))
        .unwrap_or_else(|_| "unknown".into())
}

fn build_kind() -> &'static str {
    if cfg!(debug_assertions) {
        "debug build: figures are not representative"
    } else {
        "optimized build"
    }
}

// ---------------------------------------------------------------------------------------
// 1. generate, 64-bit static Manchester, all views
// ---------------------------------------------------------------------------------------

fn bench_generate() {
    println!();
    println!("1. generate: 64-bit static Manchester, block 4, buffers every 8, all five files");
    let spec = parse(M64);
    let g = carrywright::generate(&spec).expect("generate succeeds");
    let bytes: usize = g.files.iter().map(|(_, t)| t.len()).sum();
    let ev = Evaluator::new(&g.design).expect("evaluator compiles");
    println!(
        "  {} files, {} bytes; logic check {} vectors; evaluator {} ops",
        g.files.len(),
        bytes,
        g.check.vectors,
        ev.n_ops()
    );
    for (name, text) in &g.files {
        println!("    {name:<12} {:>9} bytes", text.len());
    }

    let whole = measure(5, 50, || carrywright::generate(&spec).unwrap());
    line("generate (build+check+render)", &whole);

    let design = carrywright::build(&spec).unwrap();
    let build = measure(5, 50, || carrywright::build(&spec).unwrap());
    let check = measure(5, 50, || {
        sim::check_or_fail(
            &design,
            1,
            carrywright::GENERATE_RANDOM,
            carrywright::GENERATE_EXHAUSTIVE_MAX,
        )
        .unwrap()
    });
    let counts = summary::counts(&design);
    let est = carrywright::timing::engine::estimate(&spec, &design).ok();
    let estimate = measure(1, 5, || {
        carrywright::timing::engine::estimate(&spec, &design)
    });
    let render = measure(5, 50, || {
        emit::render_all(
            &spec,
            &design,
            &counts,
            est.as_ref().ok_or("none"),
            None,
            None,
        )
        .unwrap()
    });
    line("  build (arch + structural check)", &build);
    line("  check_or_fail (16,384 random + 7)", &check);
    line("  timing estimate (worst-pair search)", &estimate);
    line("  render_all (five files)", &render);
    let sum = build.median + check.median + estimate.median + render.median;
    println!(
        "  {:<40} {:>16.3} ms (sum of the four medians)",
        "  sum",
        ms(sum)
    );

    // Finer split, to see where the time goes.
    println!("  detail:");
    let arch = measure(3, 30, || carrywright::arch::build(&spec));
    line("    arch::build (netlist only)", &arch);
    let structure = measure(3, 30, || design.check().unwrap());
    line("    Design::check (structure)", &structure);
    let compile = measure(3, 30, || Evaluator::new(&design).unwrap());
    line("    Evaluator::new (flatten+compile)", &compile);
    let plan = vectors::plan(spec.width, spec.testbench.random, spec.testbench.seed, None);
    let deck = spice::DeckPlan::new(&spec, &design, &plan, est.as_ref()).unwrap();
    let netlist = spice::subcircuits(&spec, &design).unwrap();
    let views: [(&str, Stats); 5] = [
        (
            "    verilog::design",
            measure(3, 30, || verilog::design(&spec, &design).unwrap()),
        ),
        (
            "    verilog::testbench",
            measure(3, 30, || verilog::testbench(&spec, &plan).unwrap()),
        ),
        (
            "    spice::subcircuits",
            measure(3, 30, || spice::subcircuits(&spec, &design).unwrap()),
        ),
        (
            "    spice::deck",
            measure(3, 30, || {
                spice::deck(&spec, &design, &deck, &netlist).unwrap()
            }),
        ),
        (
            "    summary::json",
            measure(3, 30, || {
                summary::json(
                    &spec,
                    &design,
                    &counts,
                    &plan,
                    &deck,
                    est.as_ref().ok_or("none"),
                    None,
                    None,
                )
                .unwrap()
            }),
        ),
    ];
    for (label, s) in &views {
        line(label, s);
    }

    let med = ms(whole.median);
    let target = format!("< {GEN_TARGET_MS} ms");
    figure(
        "generate m64 median",
        &format!("{med:.3} ms"),
        &target,
        verdict(med < GEN_TARGET_MS),
    );
    figure(
        "generate m64 min",
        &format!("{:.3} ms", ms(whole.min)),
        "",
        "",
    );
    figure(
        "  build median",
        &format!("{:.3} ms", ms(build.median)),
        "",
        "",
    );
    figure(
        "  check_or_fail median",
        &format!("{:.3} ms", ms(check.median)),
        "",
        "",
    );
    figure(
        "  render_all median",
        &format!("{:.3} ms", ms(render.median)),
        "",
        "",
    );
}

// ---------------------------------------------------------------------------------------
// 2. check throughput and raw evaluator throughput, 64-bit ripple
// ---------------------------------------------------------------------------------------

fn ripple() -> (Spec, Design) {
    let spec = parse(R64);
    let design = carrywright::build(&spec).expect("ripple builds");
    (spec, design)
}

fn bench_check() {
    println!();
    println!("2. bit-parallel check: 64-bit ripple, {N_CHECK} random vectors (+7 directed)");
    let (_, design) = ripple();
    let first = sim::check(&design, 1, N_CHECK, 12).unwrap();
    assert_eq!(
        first.mismatches, 0,
        "the ripple adder must pass its own check"
    );
    let s = measure(1, 7, || sim::check(&design, 1, N_CHECK, 12).unwrap());
    line("check(design, 1, 2_000_000, 12)", &s);
    let rate = first.vectors as f64 / s.median.as_secs_f64();
    let best = first.vectors as f64 / s.min.as_secs_f64();
    println!(
        "  {:<40} {} (median), {} (best)",
        "check throughput",
        mps(rate),
        mps(best)
    );

    // Raw evaluator on fixed input words.
    let mut ev = Evaluator::new(&design).unwrap();
    let mut rng = Rng::new(7);
    let inputs: Vec<u64> = (0..129).map(|_| rng.next_u64()).collect();
    let mut outputs = vec![0u64; 65];
    ev.eval(&inputs, &mut outputs);
    assert!(
        eval_word_is_sum(&inputs, &outputs),
        "evaluator disagrees with a + b + cin"
    );
    // Calibrate a batch to roughly 50 ms, then time several batches.
    let mut calls = 1usize;
    loop {
        let t = Instant::now();
        for _ in 0..calls {
            ev.eval(black_box(&inputs), black_box(&mut outputs));
        }
        if t.elapsed() > Duration::from_millis(50) || calls >= 1 << 30 {
            break;
        }
        calls *= 2;
    }
    let batches = measure(1, 9, || {
        for _ in 0..calls {
            ev.eval(black_box(&inputs), black_box(&mut outputs));
        }
    });
    let per_call = batches.median.as_secs_f64() / calls as f64;
    let ev_rate = 64.0 / per_call;
    println!(
        "  {:<40} {} ops, {:.1} ns per call ({} calls per batch, {} batches)",
        "Evaluator::eval",
        ev.n_ops(),
        per_call * 1e9,
        calls,
        batches.runs
    );
    println!(
        "  {:<40} {} ({:.2} ns per op)",
        "evaluator throughput (64 vectors/call)",
        mps(ev_rate),
        per_call * 1e9 / ev.n_ops() as f64
    );
    // What the check spends outside the evaluator: vector generation, transposes, compare.
    let words = first.vectors.div_ceil(64) as f64;
    let in_eval = words * per_call;
    let total = s.median.as_secs_f64();
    println!(
        "  {:<40} {:.1}% of the check in eval, {:.1}% in vectors/transposes/compare",
        "split (estimate)",
        100.0 * in_eval / total,
        100.0 * (1.0 - in_eval / total)
    );

    figure(
        "check r64 2M vectors",
        &mps(rate),
        &format!("> {}", mps(CHECK_TARGET_PER_S)),
        verdict(rate > CHECK_TARGET_PER_S),
    );
    figure("evaluator r64 raw", &mps(ev_rate), "", "");
}

/// Does one evaluated word agree with native addition, lane by lane?
fn eval_word_is_sum(inputs: &[u64], outputs: &[u64]) -> bool {
    let mut a: [u64; 64] = inputs[0..64].try_into().unwrap();
    let mut b: [u64; 64] = inputs[64..128].try_into().unwrap();
    let mut s: [u64; 64] = outputs[0..64].try_into().unwrap();
    sim::transpose64(&mut a);
    sim::transpose64(&mut b);
    sim::transpose64(&mut s);
    (0..64).all(|k| {
        let cin = (inputs[128] >> k) & 1 == 1;
        let v = Vector::new(a[k] as u128, b[k] as u128, cin, 64);
        v.s as u64 == s[k] && v.cout == ((outputs[64] >> k) & 1 == 1)
    })
}

// ---------------------------------------------------------------------------------------
// 3. the same vectors in Icarus Verilog
// ---------------------------------------------------------------------------------------

/// Check `vs` (64-bit vectors) with the evaluator, 64 per word; returns mismatching bits.
fn eval_vectors(ev: &mut Evaluator, vs: &[Vector]) -> u64 {
    let mut inputs = vec![0u64; 129];
    let mut outputs = vec![0u64; 65];
    let mut bad_bits = 0u64;
    for chunk in vs.chunks(64) {
        let mut a = [0u64; 64];
        let mut b = [0u64; 64];
        let mut s = [0u64; 64];
        let (mut cin, mut cout) = (0u64, 0u64);
        for k in 0..64 {
            // Pad a short last word with its first vector; masked below.
            let v = chunk.get(k).unwrap_or(&chunk[0]);
            a[k] = v.a as u64;
            b[k] = v.b as u64;
            s[k] = v.s as u64;
            cin |= (v.cin as u64) << k;
            cout |= (v.cout as u64) << k;
        }
        sim::transpose64(&mut a);
        sim::transpose64(&mut b);
        sim::transpose64(&mut s);
        inputs[..64].copy_from_slice(&a);
        inputs[64..128].copy_from_slice(&b);
        inputs[128] = cin;
        ev.eval(&inputs, &mut outputs);
        let mut bad = outputs[64] ^ cout;
        for (o, e) in outputs[..64].iter().zip(&s) {
            bad |= o ^ e;
        }
        if chunk.len() < 64 {
            bad &= (1u64 << chunk.len()) - 1;
        }
        bad_bits += bad.count_ones() as u64;
    }
    bad_bits
}

fn on_path(tool: &str) -> bool {
    std::env::var_os("PATH")
        .is_some_and(|p| std::env::split_paths(&p).any(|d| d.join(tool).is_file()))
}

fn testbench(top: &str, n: usize) -> String {
    format!(
        r#"// {n} vectors from vectors.hex: {{cout nibble, cin nibble, s, b, a}} per line.
module bench_tb;
  reg [199:0] mem [0:{last}];
  reg [199:0] w;
  reg [63:0] a;
  reg [63:0] b;
  reg cin;
  wire [63:0] s;
  wire cout;
  integer i;
  integer errors;

  {top} xdut(.a(a), .b(b), .cin(cin), .s(s), .cout(cout));

  initial begin
    $readmemh("vectors.hex", mem);
    if ($test$plusargs("loadonly")) begin
      $display("LOADED {n}");
      $finish;
    end
    errors = 0;
    for (i = 0; i < {n}; i = i + 1) begin
      w = mem[i];
      a = w[63:0];
      b = w[127:64];
      cin = w[192];
      #10;
      if (s !== w[191:128] || cout !== w[196]) begin
        if (errors < 5)
          $display("MISMATCH %0d: a=%h b=%h cin=%b gives s=%h cout=%b, expected s=%h cout=%b",
                   i, a, b, cin, s, cout, w[191:128], w[196]);
        errors = errors + 1;
      end
    end
    $display("DONE {n} vectors, %0d errors", errors);
    $finish;
  end
endmodule
"#,
        last = n - 1
    )
}

fn run_timed(cmd: &mut Command) -> (Duration, std::process::Output) {
    let t = Instant::now();
    let out = cmd.output().expect("the tool starts");
    (t.elapsed(), out)
}

fn bench_icarus() {
    println!();
    println!("3. Icarus Verilog vs. the internal check: 64-bit ripple, {N_ICARUS} random vectors");
    let (spec, design) = ripple();
    let mut rng = Rng::new(1);
    let vs: Vec<Vector> = (0..N_ICARUS)
        .map(|_| vectors::random_vector(&mut rng, 64))
        .collect();

    // Internal: the evaluator on exactly these vectors (packing, eval and compare timed;
    // generating the vectors is not, as Icarus reads them precomputed too).
    let mut ev = Evaluator::new(&design).unwrap();
    let bad = eval_vectors(&mut ev, &vs);
    assert_eq!(bad, 0, "the ripple adder must agree with native addition");
    let internal = measure(3, 21, || eval_vectors(&mut ev, black_box(&vs)));
    let internal_rate = N_ICARUS as f64 / internal.median.as_secs_f64();
    line("evaluator on the same vectors", &internal);
    println!("  {:<40} {}", "internal rate", mps(internal_rate));
    // The library's own entry point: its random vectors are these same ones (seed 1), after
    // 7 directed vectors; it also compiles the evaluator and draws the vectors itself.
    let via_check = measure(1, 11, || sim::check(&design, 1, N_ICARUS, 12).unwrap());
    line("check(design, 1, 100_000, 12) [7 + N]", &via_check);
    let check_rate = (N_ICARUS + 7) as f64 / via_check.median.as_secs_f64();
    println!(
        "  {:<40} {}",
        "check rate (incl. 7 directed)",
        mps(check_rate)
    );

    let missing: Vec<&str> = ["iverilog", "vvp"]
        .into_iter()
        .filter(|t| !on_path(t))
        .collect();
    if !missing.is_empty() {
        println!(
            "  Icarus comparison SKIPPED: {} not found on PATH",
            missing.join(" and ")
        );
        figure(
            "icarus ratio",
            "skipped",
            &format!(">= {RATIO_TARGET}x"),
            &format!("skipped: {} not on PATH", missing.join(", ")),
        );
        figure("internal rate (same vectors)", &mps(internal_rate), "", "");
        return;
    }

    let dir = tempfile::Builder::new()
        .prefix("carrywright-bench-")
        .tempdir()
        .expect("a temporary folder");
    let top = design.top().name.clone();
    let v_text = verilog::design(&spec, &design).unwrap();
    std::fs::write(dir.path().join("r64.v"), v_text).unwrap();
    std::fs::write(dir.path().join("bench_tb.v"), testbench(&top, N_ICARUS)).unwrap();
    let mut hex = String::with_capacity(N_ICARUS * 51);
    for v in &vs {
        use std::fmt::Write;
        writeln!(
            hex,
            "{:x}{:x}{:016x}{:016x}{:016x}",
            v.cout as u8, v.cin as u8, v.s as u64, v.b as u64, v.a as u64
        )
        .unwrap();
    }
    std::fs::write(dir.path().join("vectors.hex"), hex).unwrap();

    let (compile_t, out) = run_timed(Command::new("iverilog").current_dir(dir.path()).args([
        "-g2005",
        "-o",
        "bench_tb.vvp",
        "-s",
        "bench_tb",
        "bench_tb.v",
        "r64.v",
    ]));
    if !out.status.success() {
        println!(
            "  Icarus comparison SKIPPED: iverilog failed ({}): {}",
            out.status,
            String::from_utf8_lossy(&out.stderr).trim()
        );
        figure("icarus ratio", "skipped", "", "skipped: iverilog failed");
        return;
    }
    println!(
        "  {:<40} {:>9.1} ms",
        "iverilog -g2005 compile",
        ms(compile_t)
    );

    let vvp = |extra: Option<&str>| {
        let mut c = Command::new("vvp");
        c.current_dir(dir.path()).args(["-n", "bench_tb.vvp"]);
        if let Some(e) = extra {
            c.arg(e);
        }
        run_timed(&mut c)
    };
    let mut times = vec![];
    let mut report = String::new();
    for _ in 0..VVP_RUNS {
        let (t, out) = vvp(None);
        report = String::from_utf8_lossy(&out.stdout).into_owned();
        if !out.status.success() || !report.contains(&format!("DONE {N_ICARUS} vectors, 0 errors"))
        {
            println!(
                "  Icarus run FAILED ({}): {} {}",
                out.status,
                report.trim(),
                String::from_utf8_lossy(&out.stderr).trim()
            );
            figure("icarus ratio", "failed", "", "Icarus run failed");
            return;
        }
        times.push(t);
    }
    let sim_t = Stats::from(times);
    let load_t = Stats::from((0..VVP_RUNS).map(|_| vvp(Some("+loadonly")).0).collect());
    let done = report
        .lines()
        .find(|l| l.starts_with("DONE"))
        .unwrap_or("")
        .trim();
    println!("  Icarus says: {done}");
    line("vvp -n (load + simulate)", &sim_t);
    line("vvp -n +loadonly ($readmemh, startup)", &load_t);
    let icarus_rate = N_ICARUS as f64 / sim_t.median.as_secs_f64();
    let sim_only = (sim_t.median.saturating_sub(load_t.median)).as_secs_f64();
    let icarus_sim_rate = N_ICARUS as f64 / sim_only;
    println!(
        "  {:<40} {}",
        "Icarus rate (whole vvp run)",
        mps(icarus_rate)
    );
    println!(
        "  {:<40} {}",
        "Icarus rate (minus load)",
        mps(icarus_sim_rate)
    );
    let ratio = internal_rate / icarus_rate;
    let ratio_sim = internal_rate / icarus_sim_rate;
    println!(
        "  {:<40} {:.0}x (whole vvp run), {:.0}x (minus load)",
        "ratio internal / Icarus", ratio, ratio_sim
    );

    figure("internal rate (same vectors)", &mps(internal_rate), "", "");
    figure("icarus rate (vvp -n)", &mps(icarus_rate), "", "");
    figure(
        "icarus compile",
        &format!("{:.1} ms", ms(compile_t)),
        "",
        "",
    );
    figure(
        "ratio internal / icarus",
        &format!("{ratio:.0}x"),
        &format!(">= {RATIO_TARGET:.0}x"),
        verdict(ratio >= RATIO_TARGET),
    );
    figure(
        "  ratio, vvp load excluded",
        &format!("{ratio_sim:.0}x"),
        &format!(">= {RATIO_TARGET:.0}x"),
        verdict(ratio_sim >= RATIO_TARGET),
    );
}

const ARCH_TARGET_MS: f64 = 20.0;
const MATRIX_TARGET_S: f64 = 10.0;

fn arch_spec(arch: &str, width: usize) -> Spec {
    parse(&format!(
        "name: a{width}\nwidth: {width}\narchitecture: {arch}\n"
    ))
}

/// Every architecture at 64 bits (all views, in process), the whole 11-architecture ×
/// 4..=128-bit matrix (generate, which includes the internal check), and how generation time
/// grows with width for Kogge-Stone and Brent-Kung against their prefix cell counts.
fn bench_architectures() {
    println!();
    println!("4. every architecture, 64 bits, all views (generate = build + checks + render)");
    let archs: Vec<&str> = spec::ARCHITECTURES.iter().map(|a| a.as_str()).collect();
    let mut worst = 0.0f64;
    for a in &archs {
        let s = arch_spec(a, 64);
        let st = measure(2, 15, || carrywright::generate(&s).unwrap());
        line(&format!("  {a}"), &st);
        worst = worst.max(ms(st.median));
    }
    figure(
        "generate 64-bit, slowest architecture (median)",
        &format!("{worst:.3} ms"),
        &format!("< {ARCH_TARGET_MS} ms"),
        verdict(worst < ARCH_TARGET_MS),
    );

    let t0 = Instant::now();
    let mut designs = 0;
    for a in &archs {
        for w in 4..=128 {
            black_box(carrywright::generate(&arch_spec(a, w)).unwrap());
            designs += 1;
        }
    }
    let total = t0.elapsed().as_secs_f64();
    println!("  matrix: {designs} designs (11 architectures x widths 4..=128) in {total:.2} s");
    figure(
        "matrix 11 x 4..128 generate+check",
        &format!("{total:.2} s"),
        &format!("< {MATRIX_TARGET_S} s"),
        verdict(total < MATRIX_TARGET_S),
    );

    let s128 = arch_spec("kogge-stone", 128);
    let d128 = carrywright::build(&s128).unwrap();
    let c128 = summary::counts(&d128);
    println!("  split for kogge-stone N=128:");
    line(
        "    build (arch + structural check)",
        &measure(1, 9, || carrywright::build(&s128).unwrap()),
    );
    line(
        "    check_or_fail",
        &measure(1, 9, || {
            sim::check_or_fail(
                &d128,
                1,
                carrywright::GENERATE_RANDOM,
                carrywright::GENERATE_EXHAUSTIVE_MAX,
            )
            .unwrap()
        }),
    );
    line(
        "    verilog::design",
        &measure(1, 9, || verilog::design(&s128, &d128).unwrap()),
    );
    line(
        "    spice::subcircuits",
        &measure(1, 9, || spice::subcircuits(&s128, &d128).unwrap()),
    );
    line(
        "    render_all",
        &measure(1, 9, || {
            emit::render_all(&s128, &d128, &c128, Err("none"), None, None).unwrap()
        }),
    );
    line("    logic_depth", &measure(1, 9, || d128.logic_depth()));
    println!("  growth with width (generate median; prefix cells; time per cell):");
    for a in ["kogge-stone", "brent-kung"] {
        for w in [8, 16, 32, 64, 128] {
            let s = arch_spec(a, w);
            let st = measure(2, 11, || carrywright::generate(&s).unwrap());
            let cells = carrywright::build(&s)
                .unwrap()
                .prefix
                .map_or(0, |p| p.stats.cells);
            println!(
                "    {a:<12} N={w:<4} {:>9.3} ms  {cells:>5} cells  {:>7.2} us/cell  N*log2(N) = {}",
                ms(st.median),
                ms(st.median) * 1000.0 / cells as f64,
                w * w.trailing_zeros() as usize
            );
        }
    }
}

// ---------------------------------------------------------------------------------------
// 5. timing estimate (src/timing): graph building, one timed vector pair, the whole search
// ---------------------------------------------------------------------------------------

const ESTIMATE_TARGET_MS: f64 = 2.0;

fn bench_estimate() {
    use carrywright::timing::engine::{self, Graph};
    use carrywright::timing::search::{Budget, In, Pair, Timer};
    println!();
    println!("5. timing estimate: transistor graph, one timed pair, the whole worst-path search");
    let mut at64 = None;
    for arch in ["manchester", "kogge-stone", "ripple"] {
        for width in [8usize, 16, 32, 64, 128] {
            let text = format!(
                "name: e{width}\nwidth: {width}\narchitecture: {arch}\nblock: 4\nbuffers: {}\n",
                if arch == "manchester" && width > 8 {
                    "{every: 8}"
                } else {
                    "none"
                }
            );
            let s = parse(&text);
            let d = carrywright::build(&s).unwrap();
            // The built-in `generic` technology's characterised timing.
            let tm = s.technology.timing.clone().expect("generic carries timing");
            let g_st = measure(1, 5, || Graph::new(&s, &d, &tm).unwrap());
            let g = Graph::new(&s, &d, &tm).unwrap();
            let m = vectors::mask(width);
            let mut t = Timer::new(&g).unwrap();
            let mut flip = false;
            let pair_st = measure(5, 41, || {
                // cin toggled with every bit propagating, alternating edges.
                flip = !flip;
                let before = In {
                    a: m,
                    b: 0,
                    cin: flip,
                };
                t.time(Pair {
                    before,
                    after: In {
                        cin: !flip,
                        ..before
                    },
                })
                .unwrap()
            });
            let budget = Budget {
                seed: 1,
                ..Budget::default()
            };
            let runs = if width >= 64 { 3 } else { 5 };
            let mut pairs = 0;
            let est_st = measure(0, runs, || {
                let e = engine::estimate_with(&s, &d, &tm, budget).unwrap();
                pairs = e.pairs_timed;
                e
            });
            println!(
                "  {arch:<12} {width:>3} bits: {:>6} devices {:>5} stages; graph {:>8.3} ms, one pair {:>8.3} ms, estimate {:>9.2} ms ({pairs} pairs, {:.3} ms/pair)",
                g.devs.len(),
                g.stages.len(),
                ms(g_st.median),
                ms(pair_st.median),
                ms(est_st.median),
                ms(est_st.median) / pairs as f64
            );
            if arch == "manchester" && width == 64 {
                at64 = Some((ms(pair_st.median), ms(est_st.median)));
            }
        }
    }
    if let Some((pair, est)) = at64 {
        figure(
            "estimate 64-bit static Manchester, one pair (median)",
            &format!("{pair:.3} ms"),
            "-",
            "-",
        );
        figure(
            "estimate 64-bit static Manchester, whole search (median)",
            &format!("{est:.1} ms"),
            &format!("< {ESTIMATE_TARGET_MS} ms"),
            verdict(est < ESTIMATE_TARGET_MS),
        );
    }
}

// ---------------------------------------------------------------------------------------
// 6. switch-level check of the SPICE view (src/switch): vectors per second, the added time
//    inside `generate`, and `verify` of a 128-bit Kogge-Stone netlist
// ---------------------------------------------------------------------------------------

const SWITCH_GENERATE_TARGET_MS: f64 = 20.0;

fn bench_switch() {
    use carrywright::switch;
    println!();
    println!("6. switch-level check: NAME.sp parsed, flattened and simulated as switches");
    let designs = [
        ("64-bit static Manchester", "name: m64\nwidth: 64\narchitecture: manchester\nblock: 4\nbuffers: {every: 8}\n"),
        ("64-bit dynamic Manchester", "name: d64\nwidth: 64\narchitecture: manchester\nstyle: dynamic\nblock: 4\nbuffers: {every: 4}\n"),
        ("64-bit Kogge-Stone", "name: k64\nwidth: 64\narchitecture: kogge-stone\n"),
    ];
    for (label, text) in designs {
        let s = parse(text);
        let design = carrywright::build(&s).unwrap();
        let sp = spice::subcircuits(&s, &design).unwrap();
        let random = carrywright::GENERATE_RANDOM;
        let mut vectors = 0;
        let st = measure(1, 5, || {
            let r =
                switch::check_text(&sp, "bench.sp", &design, &s.technology, 1, random, 8).unwrap();
            assert!(r.passed);
            vectors = r.vectors;
            r
        });
        let rate = vectors as f64 / st.median.as_secs_f64();
        line(&format!("{label}: {vectors} vectors"), &st);
        println!("    {:.2} M vectors/s", rate / 1e6);
        figure(
            &format!("switch-level vectors/s, {label}"),
            &format!("{:.2} M/s", rate / 1e6),
            "-",
            "-",
        );
        figure(
            &format!("switch-level check inside generate, {label}"),
            &format!("{:.1} ms", ms(st.median)),
            &format!("generate < {SWITCH_GENERATE_TARGET_MS} ms in all"),
            "-",
        );
        let total = measure(1, 5, || carrywright::generate(&s).unwrap());
        line(&format!("{label}: whole generate"), &total);
        figure(
            &format!("generate with the switch-level check, {label}"),
            &format!("{:.1} ms", ms(total.median)),
            &format!("< {SWITCH_GENERATE_TARGET_MS} ms"),
            verdict(ms(total.median) < SWITCH_GENERATE_TARGET_MS),
        );
    }
    // `verify` of a 128-bit Kogge-Stone netlist, as the command runs it: both files parsed
    // and flattened, the switch-level check (directed + 100,000 random vectors), the
    // structural comparison and the rules; the edited file has its top's lines reversed.
    let s = parse("name: k128\nwidth: 128\narchitecture: kogge-stone\n");
    let design = carrywright::build(&s).unwrap();
    let sp = spice::subcircuits(&s, &design).unwrap();
    // Logical lines (a line with its `+` continuations), the top's elements reversed.
    let mut groups: Vec<Vec<&str>> = vec![];
    for l in sp.lines() {
        match groups.last_mut() {
            Some(g) if l.starts_with('+') => g.push(l),
            _ => groups.push(vec![l]),
        }
    }
    let top = groups
        .iter()
        .position(|g| g[0].starts_with(".subckt k128 "))
        .unwrap();
    let end = top
        + groups[top..]
            .iter()
            .position(|g| g[0].starts_with(".ends"))
            .unwrap();
    groups[top + 1..end].reverse();
    let edited = groups.concat().join("\n") + "\n";
    let opts = switch::verify::Options {
        strict: false,
        random: sim::RANDOM_MIN,
        exhaustive_max: 10,
    };
    let st = measure(1, 5, || {
        let design = carrywright::build(&s).unwrap();
        let reference = spice::subcircuits(&s, &design).unwrap();
        let v = switch::verify::verify(&edited, "k128.sp", &s, &design, &reference, &opts).unwrap();
        assert!(v.exit_code == 0 && v.structure.isomorphic, "{}", v.render());
        v
    });
    line(
        "verify 128-bit Kogge-Stone (build, parse, check, compare)",
        &st,
    );
    figure(
        "verify of a 128-bit Kogge-Stone netlist",
        &format!("{:.0} ms", ms(st.median)),
        "< 1000 ms",
        verdict(ms(st.median) < 1000.0),
    );
}
