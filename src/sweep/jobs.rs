//! A sweep as independent jobs: one folder a point with its spec and one command line, a
//! Makefile (`make -j N` on one machine) and a Slurm job-array script (`sbatch` on a
//! cluster); `collect` gathers the results into the files a local sweep writes.

use super::{evaluate, hash_of, point_values, Options, Outcome, PointResult, Sweep};
use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};
use serde_yaml::{Mapping, Value};
use std::path::{Path, PathBuf};

/// `jobs/NNNN/job.json`.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Job {
    pub index: usize,
    pub hash: String,
    pub values: Vec<(String, String)>,
    pub estimate_only: bool,
    /// Where the point's relative paths (a technology file) resolve from, absolute.
    pub base_dir: PathBuf,
    pub timeout_s: f64,
}

fn io(path: &Path) -> impl Fn(std::io::Error) -> Error + '_ {
    move |e| Error::Output(format!("{}: {e}", path.display()))
}

fn write(path: &Path, text: &str) -> Result<()> {
    if let Some(d) = path.parent() {
        std::fs::create_dir_all(d).map_err(io(d))?;
    }
    let tmp = path.with_extension("tmp");
    std::fs::write(&tmp, text).map_err(io(&tmp))?;
    std::fs::rename(&tmp, path).map_err(io(path))
}

/// The sweep file again, its base inline (so the export folder stands alone).
pub fn sweep_yaml(s: &Sweep) -> String {
    let mut m = Mapping::new();
    m.insert("base".into(), Value::Mapping(s.base.clone()));
    let mut vary = Mapping::new();
    for (k, v) in &s.vary {
        vary.insert(Value::String(k.clone()), Value::Sequence(v.clone()));
    }
    m.insert("vary".into(), Value::Mapping(vary));
    if !s.exclude.is_empty() {
        m.insert(
            "exclude".into(),
            Value::Sequence(s.exclude.iter().cloned().map(Value::Mapping).collect()),
        );
    }
    if let Some(t) = s.target {
        let mut tm = Mapping::new();
        tm.insert("delay".into(), Value::String(format!("{:e}", t.delay_s)));
        tm.insert("margin".into(), Value::String(format!("{}", t.margin)));
        m.insert("target".into(), Value::Mapping(tm));
    }
    serde_yaml::to_string(&m).unwrap_or_default()
}

/// Write the jobs into `dir`; `exe` is the carrywright the Makefile and the Slurm script run.
/// Returns the number of jobs.
pub fn export(s: &Sweep, dir: &Path, o: &Options, exe: &Path) -> Result<usize> {
    let base_dir = std::fs::canonicalize(&s.base_dir).map_err(io(&s.base_dir))?;
    let points = s.points();
    for (i, p) in points.iter().enumerate() {
        let text = s.point_text(p);
        let job = Job {
            index: i,
            hash: hash_of(&text, &s.base_dir, o.estimate_only),
            values: point_values(p),
            estimate_only: o.estimate_only,
            base_dir: base_dir.clone(),
            timeout_s: o.timeout.as_secs_f64(),
        };
        let jd = dir.join("jobs").join(format!("{i:04}"));
        write(&jd.join("spec.yaml"), &text)?;
        write(
            &jd.join("job.json"),
            &(serde_json::to_string_pretty(&job).unwrap_or_default() + "\n"),
        )?;
    }
    write(&dir.join("sweep.yaml"), &sweep_yaml(s))?;
    let exe = exe.display().to_string();
    let abs = std::fs::canonicalize(dir).map_err(io(dir))?;
    let names: Vec<String> = (0..points.len())
        .map(|i| format!("jobs/{i:04}/result.json"))
        .collect();
    let mut mk = format!(
        "# carrywright sweep as jobs: `make -j N` runs them, then `carrywright collect .`.\n# Each job writes jobs/NNNN/result.json; a failed job is retried once.\nCW ?= {exe}\n\nall: {}\n\njobs/%/result.json:\n\t$(CW) job jobs/$* || $(CW) job jobs/$*\n\n.PHONY: all\n",
        names.join(" \\\n  ")
    );
    mk = mk.replace("all: ", "all: \\\n  ");
    write(&dir.join("Makefile"), &mk)?;
    let n = points.len();
    let slurm = format!(
        "#!/bin/bash\n# carrywright sweep as a Slurm job array: `sbatch slurm.sh`, then `carrywright collect {dir}`.\n# Each array task runs one point and writes jobs/NNNN/result.json; a failed task is retried\n# once (the job records its attempts).\n#SBATCH --job-name=carrywright-sweep\n#SBATCH --array=0-{last}\n#SBATCH --cpus-per-task=1\n#SBATCH --output={dir}/jobs/slurm-%a.out\nset -u\ncd {dir}\nCW=\"${{CW:-{exe}}}\"\nidx=$(printf %04d \"$SLURM_ARRAY_TASK_ID\")\n\"$CW\" job \"jobs/$idx\" || {{ echo \"retrying job $idx\" >&2; \"$CW\" job \"jobs/$idx\"; }}\n",
        dir = abs.display(),
        last = n.saturating_sub(1),
    );
    write(&dir.join("slurm.sh"), &slurm)?;
    Ok(n)
}

/// `carrywright job JOBDIR`: run one exported point; writes JOBDIR/result.json.
pub fn run_job(jd: &Path, load: &crate::spec::LoadOptions) -> Result<PointResult> {
    let job: Job = serde_json::from_str(
        &std::fs::read_to_string(jd.join("job.json")).map_err(io(&jd.join("job.json")))?,
    )
    .map_err(|e| Error::Input(format!("{}: {e}", jd.join("job.json").display())))?;
    let text = std::fs::read_to_string(jd.join("spec.yaml")).map_err(io(&jd.join("spec.yaml")))?;
    // Attempts so far, for the record of a retried job.
    let attempts_file = jd.join("attempts");
    let attempts = std::fs::read_to_string(&attempts_file)
        .ok()
        .and_then(|t| t.trim().parse::<u32>().ok())
        .unwrap_or(0)
        + 1;
    write(&attempts_file, &format!("{attempts}\n"))?;
    let o = Options {
        estimate_only: job.estimate_only,
        limit: None,
        timeout: std::time::Duration::from_secs_f64(job.timeout_s),
        load: load.clone(),
        progress: false,
    };
    let r = evaluate(
        &text,
        &job.base_dir,
        job.index,
        job.values.clone(),
        &job.hash,
        &jd.join("views"),
        &o,
    );
    write(
        &jd.join("result.json"),
        &(serde_json::to_string_pretty(&r).unwrap_or_default() + "\n"),
    )?;
    Ok(r)
}

/// `carrywright collect DIR`: the exported sweep and every job's result (a job without one
/// is recorded as `not run`).
pub fn collect(dir: &Path) -> Result<(Sweep, Outcome)> {
    let t0 = std::time::Instant::now();
    let s = Sweep::load(&dir.join("sweep.yaml"))?;
    let n = s.points().len();
    let mut points = vec![];
    let mut left = 0;
    for i in 0..n {
        let jd = dir.join("jobs").join(format!("{i:04}"));
        match std::fs::read_to_string(jd.join("result.json"))
            .ok()
            .and_then(|t| serde_json::from_str::<PointResult>(&t).ok())
        {
            Some(r) => points.push(r),
            None => {
                left += 1;
                let job: Option<Job> = std::fs::read_to_string(jd.join("job.json"))
                    .ok()
                    .and_then(|t| serde_json::from_str(&t).ok());
                let mut r = evaluate_placeholder(i);
                if let Some(j) = job {
                    r.hash = j.hash;
                    r.values = j.values;
                }
                points.push(r);
            }
        }
    }
    let sim_wall_s = points.iter().filter_map(|p| p.sim_wall_s).sum();
    Ok((
        s,
        Outcome {
            computed: 0,
            reused: n - left,
            left,
            points,
            wall_s: t0.elapsed().as_secs_f64(),
            sim_wall_s,
        },
    ))
}

fn evaluate_placeholder(index: usize) -> PointResult {
    let mut r = PointResult::new(index, "", vec![], "not run");
    r.reason = Some("its job wrote no result".into());
    r
}
