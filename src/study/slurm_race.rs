//! Slurm scripts for a raced study: one job array per stage (its cells form one contiguous range of the
//! stage-major plan), a decision job between stages (`termwise run --decide K`, which fails while rung K
//! cannot be decided, so the next stage never starts on incomplete evidence), and the report job after the
//! last stage. Each array waits for the decision before it (`afterok`), each decision for the whole array
//! before it (`afterany`: a failed task leaves its run unfinished, and the decision then says which).

use super::experiment::{Experiment, RaceSpec, VariantKind};
use super::race::stage_of;
use super::run::RunSpec;
use super::slurm::{common_options, job_name, q, write_executable, SlurmFiles, SlurmSpec};
use super::StudyError;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

fn stage(exp: &Experiment, race: &RaceSpec, r: &RunSpec) -> usize {
    match exp.variants[r.variant].kind {
        VariantKind::Baseline => 0,
        VariantKind::Learned => stage_of(&race.rung_seeds, r.seed),
    }
}

/// The array script of one stage: cells `first..=last`.
fn stage_script(
    exp: &Experiment,
    paths: (&Path, &Path, &Path),
    k: usize,
    (first, last): (usize, usize),
    spec: &SlurmSpec,
) -> String {
    let (exe, experiment, out) = paths;
    let n = last - first + 1;
    let par = spec.max_parallel.unwrap_or(n).clamp(1, n);
    let mut s = String::from("#!/bin/bash\n");
    let _ = writeln!(
        s,
        "# termwise study `{}`, racing stage {k}: cells {first}-{last} of the stage-major plan (`termwise check`).",
        exp.study.name
    );
    let _ = writeln!(
        s,
        "# A cell whose seed racing no longer needs ends at once; a finished run is skipped."
    );
    let _ = writeln!(s, "#SBATCH --job-name={}-s{k}", job_name(&exp.study.name));
    let _ = writeln!(s, "#SBATCH --array={first}-{last}%{par}");
    common_options(&mut s, spec, &spec.time);
    let _ = writeln!(
        s,
        "#SBATCH --output={}/slurm/logs/cell-%A_%a.out",
        out.display()
    );
    s.push_str("set -euo pipefail\n");
    let _ = writeln!(
        s,
        "exec {} run {} --out {} --cell \"$SLURM_ARRAY_TASK_ID\" --jobs 1 --no-report",
        q(exe),
        q(experiment),
        q(out)
    );
    s
}

/// The decision job of rung `k`.
fn decide_script(
    exp: &Experiment,
    paths: (&Path, &Path, &Path),
    k: usize,
    spec: &SlurmSpec,
) -> String {
    let (exe, experiment, out) = paths;
    let mut s = super::slurm::single_job_opening(
        exp,
        spec,
        out,
        &format!("racing rung {k}, decided from the finished runs (writes racing.json)."),
        &format!("r{k}"),
        &format!("decide-{k}"),
    );
    let _ = writeln!(
        s,
        "exec {} run {} --out {} --decide {k}",
        q(exe),
        q(experiment),
        q(out)
    );
    s
}

/// The report job: the last decision (racing.json complete even if a task failed), status, report.
fn report_script(
    exp: &Experiment,
    paths: (&Path, &Path, &Path),
    last: usize,
    spec: &SlurmSpec,
) -> String {
    let (exe, experiment, out) = paths;
    let mut s = String::from("#!/bin/bash\n");
    let _ = writeln!(
        s,
        "# termwise study `{}`: draws report.html after the last racing stage has ended (afterany).",
        exp.study.name
    );
    let _ = writeln!(s, "#SBATCH --job-name={}-report", job_name(&exp.study.name));
    common_options(&mut s, spec, &spec.report_time);
    let _ = writeln!(
        s,
        "#SBATCH --output={}/slurm/logs/report-%j.out",
        out.display()
    );
    s.push_str("set -euo pipefail\n");
    let _ = writeln!(
        s,
        "{} run {} --out {} --decide {last} || true",
        q(exe),
        q(experiment),
        q(out)
    );
    let _ = writeln!(s, "{} status {} || true", q(exe), q(out));
    let _ = writeln!(s, "exec {} report {}", q(exe), q(out));
    s
}

/// submit.sh: queue the stages, decisions and report in order, each depending on the one before.
fn submit_script(jobs: &[(String, PathBuf, &'static str)], slurm_dir: &Path) -> String {
    let ids = slurm_dir.join("job-ids");
    let mut s = String::from(
        "#!/bin/bash\n# Submits the racing stages in order: stage array -> rung decision -> next stage array ... -> report.\n\
         # A decision that cannot be taken (unfinished runs) fails, and the stages after it are cancelled\n\
         # (--kill-on-invalid-dep=yes); rerun their cells, then submit again (finished runs are skipped).\nset -euo pipefail\n",
    );
    let mut prev: Option<String> = None;
    let mut record = String::new();
    for (label, path, after) in jobs {
        let var = label.replace('-', "_");
        let dep = match &prev {
            Some(p) => format!("--dependency={after}:\"${p}\" --kill-on-invalid-dep=yes "),
            None => String::new(),
        };
        let _ = writeln!(s, "{var}=$(sbatch --parsable {dep}{})", q(path));
        let _ = writeln!(s, "{var}=${{{var}%%;*}}");
        let _ = write!(record, "{label} %s\\n");
        prev = Some(var);
    }
    let vars: Vec<String> = jobs
        .iter()
        .map(|(l, _, _)| format!("\"${}\"", l.replace('-', "_")))
        .collect();
    let _ = writeln!(s, "printf '{record}' {} > {}", vars.join(" "), q(&ids));
    let _ = writeln!(
        s,
        "echo \"submitted {} jobs (racing stages, decisions, report); ids in \"{}",
        jobs.len(),
        q(&ids)
    );
    s
}

/// Write the scripts of a raced study into `<out>/slurm/`.
#[allow(clippy::too_many_arguments)]
pub(super) fn write_raced(
    exp: &Experiment,
    race: &RaceSpec,
    experiment: &Path,
    out: &Path,
    exe: &Path,
    spec: &SlurmSpec,
    (runs, finished): (&[RunSpec], usize),
) -> Result<SlurmFiles, StudyError> {
    let slurm_dir = out.join("slurm");
    let paths = (exe, experiment, out);
    let last = race.rung_seeds.len();
    let mut jobs: Vec<(String, PathBuf, &'static str)> = Vec::new();
    for k in 0..=last {
        let cells: Vec<usize> = runs
            .iter()
            .filter(|r| stage(exp, race, r) == k)
            .map(|r| r.index)
            .collect();
        let (first, end) = (cells[0], cells[cells.len() - 1]);
        let p = slurm_dir.join(format!("cells-stage-{k}.sbatch"));
        write_executable(&p, &stage_script(exp, paths, k, (first, end), spec))?;
        jobs.push((format!("stage-{k}"), p, "afterok"));
        if k < last {
            let d = slurm_dir.join(format!("decide-{}.sbatch", k + 1));
            write_executable(&d, &decide_script(exp, paths, k + 1, spec))?;
            jobs.push((format!("decide-{}", k + 1), d, "afterany"));
        }
    }
    let report = slurm_dir.join("report.sbatch");
    write_executable(&report, &report_script(exp, paths, last, spec))?;
    jobs.push(("report".into(), report.clone(), "afterany"));
    let submit = slurm_dir.join("submit.sh");
    write_executable(&submit, &submit_script(&jobs, &slurm_dir))?;
    Ok(SlurmFiles {
        cells: jobs[0].1.clone(),
        report,
        submit,
        logs: slurm_dir.join("logs"),
        runs: runs.len(),
        finished,
        stages: jobs[1..jobs.len() - 1]
            .iter()
            .map(|j| j.1.clone())
            .collect(),
    })
}
