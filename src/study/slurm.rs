//! `termwise slurm`: writes batch scripts that spread a study over a Slurm cluster — a job array with one
//! task per run of the plan (`termwise run --cell $SLURM_ARRAY_TASK_ID`), a report job that waits for the
//! array, and a submit script that queues both. Every task shares one results folder; runs are independent.

use super::experiment::{self, Experiment};
use super::{layout, pending, plan_runs, StudyError};
use crate::fsio::write_atomic;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// Resources asked of the workload manager for each task (standard `sbatch` options only).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct SlurmSpec {
    /// `--partition` of every job; `None` leaves the cluster's default partition. Default: `None`.
    pub partition: Option<String>,
    /// `--time` limit of one cell (one run), `[D-]HH:MM:SS`. Default: `"04:00:00"`.
    pub time: String,
    /// `--mem` of one cell, a number with an optional K/M/G/T suffix (sbatch's default unit is MB).
    /// Default: `"2G"`.
    pub mem: String,
    /// Most array tasks running at once (the `%K` of `--array`); `None` means all of them. Default: `None`.
    pub max_parallel: Option<usize>,
    /// `--account` charged for the jobs; `None` leaves the user's default account. Default: `None`.
    pub account: Option<String>,
    /// `--time` limit of the report job, `[D-]HH:MM:SS`. Default: `"00:30:00"`.
    pub report_time: String,
}

impl Default for SlurmSpec {
    fn default() -> Self {
        SlurmSpec {
            partition: None,
            time: "04:00:00".into(),
            mem: "2G".into(),
            max_parallel: None,
            account: None,
            report_time: "00:30:00".into(),
        }
    }
}

/// A Slurm option value that cannot be used.
#[derive(Debug, thiserror::Error, PartialEq, Eq)]
pub enum SlurmError {
    #[error("--time {0:?}: expected [D-]HH:MM:SS, e.g. 04:00:00 or 1-12:00:00")]
    Time(String),
    #[error("--mem {0:?}: expected a whole number with an optional K, M, G or T suffix, e.g. 2G or 1500M")]
    Mem(String),
    #[error("--max-parallel must be at least 1")]
    MaxParallel,
    #[error("{what} {value:?}: only letters, digits and . _ - , are allowed")]
    Name { what: &'static str, value: String },
    #[error("{0}: the results folder path must not contain whitespace, quotes, `%` or `\\` (it goes into #SBATCH lines)")]
    Path(PathBuf),
    #[error("the plan of this experiment has no runs")]
    EmptyPlan,
}

/// The files written by [`write_scripts`].
#[derive(Clone, Debug)]
pub struct SlurmFiles {
    /// The job-array script (one task per run).
    pub cells: PathBuf,
    /// The report job script.
    pub report: PathBuf,
    /// The script that submits both with the dependency between them.
    pub submit: PathBuf,
    /// Where the jobs' logs go.
    pub logs: PathBuf,
    /// Runs in the plan (array tasks).
    pub runs: usize,
    /// Runs already finished with the same configuration (their tasks end at once).
    pub finished: usize,
    /// A raced study: the stage arrays and decision jobs after the first stage, in submission order.
    pub stages: Vec<PathBuf>,
}

fn check_time(t: &str) -> Result<(), SlurmError> {
    let (days, hms) = match t.split_once('-') {
        Some((d, rest)) => (Some(d), rest),
        None => (None, t),
    };
    let digits = |s: &str| !s.is_empty() && s.len() <= 3 && s.bytes().all(|b| b.is_ascii_digit());
    let parts: Vec<&str> = hms.split(':').collect();
    let ok = days.is_none_or(digits)
        && parts.len() == 3
        && parts.iter().all(|p| digits(p))
        && parts[1].len() == 2
        && parts[2].len() == 2;
    let in_range = ok && parts[1] < "60" && parts[2] < "60";
    if in_range {
        Ok(())
    } else {
        Err(SlurmError::Time(t.into()))
    }
}

fn check_mem(m: &str) -> Result<(), SlurmError> {
    let num = m.strip_suffix(['K', 'M', 'G', 'T']).unwrap_or(m);
    if !num.is_empty() && num.bytes().all(|b| b.is_ascii_digit()) && num.bytes().any(|b| b != b'0')
    {
        Ok(())
    } else {
        Err(SlurmError::Mem(m.into()))
    }
}

fn check_name(what: &'static str, v: &str) -> Result<(), SlurmError> {
    if !v.is_empty()
        && v.chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '.' | '_' | '-' | ','))
    {
        Ok(())
    } else {
        Err(SlurmError::Name {
            what,
            value: v.into(),
        })
    }
}

impl SlurmSpec {
    /// Check every value before it is written into a script.
    pub fn validate(&self) -> Result<(), SlurmError> {
        check_time(&self.time)?;
        check_time(&self.report_time)?;
        check_mem(&self.mem)?;
        if self.max_parallel == Some(0) {
            return Err(SlurmError::MaxParallel);
        }
        if let Some(p) = &self.partition {
            check_name("--partition", p)?;
        }
        if let Some(a) = &self.account {
            check_name("--account", a)?;
        }
        Ok(())
    }
}

/// Quote a string for bash (single quotes; an embedded `'` becomes `'\''`).
pub fn shell_quote(s: &str) -> String {
    format!("'{}'", s.replace('\'', r"'\''"))
}

pub(super) fn q(p: &Path) -> String {
    shell_quote(&p.to_string_lossy())
}

/// A job name Slurm accepts and a person can read: the study name with other characters replaced.
pub(super) fn job_name(study: &str) -> String {
    let s: String = study
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                c
            } else {
                '_'
            }
        })
        .collect();
    format!("tw-{s}")
}

/// The `#SBATCH` lines shared by both jobs.
pub(super) fn common_options(s: &mut String, spec: &SlurmSpec, time: &str) {
    let _ = writeln!(s, "#SBATCH --ntasks=1");
    let _ = writeln!(s, "#SBATCH --cpus-per-task=1");
    let _ = writeln!(s, "#SBATCH --time={time}");
    let _ = writeln!(s, "#SBATCH --mem={}", spec.mem);
    if let Some(p) = &spec.partition {
        let _ = writeln!(s, "#SBATCH --partition={p}");
    }
    if let Some(a) = &spec.account {
        let _ = writeln!(s, "#SBATCH --account={a}");
    }
}

/// The job-array script: task K runs cell K of the plan into the shared results folder.
pub fn cells_script(
    exp: &Experiment,
    exe: &Path,
    experiment: &Path,
    out: &Path,
    runs: usize,
    spec: &SlurmSpec,
) -> String {
    let k = spec.max_parallel.unwrap_or(runs).clamp(1, runs.max(1));
    let mut s = String::from("#!/bin/bash\n");
    let _ = writeln!(
        s,
        "# termwise study `{}`: one array task per run of the plan ({runs} runs).",
        exp.study.name
    );
    let _ = writeln!(s, "# Task K runs `termwise run --cell K` (see `termwise check` for the plan); a finished run with the");
    let _ = writeln!(s, "# same configuration is skipped, so resubmitting the array (or a few tasks of it) is safe.");
    let _ = writeln!(s, "#SBATCH --job-name={}", job_name(&exp.study.name));
    let _ = writeln!(s, "#SBATCH --array=0-{}%{k}", runs - 1);
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

/// The opening of a single (not array) job's script: the shebang, a comment `what` naming the study, the job
/// name `<study>-<suffix>`, the common options with the report's time limit, the log
/// `<out>/slurm/logs/<log>-%j.out`, and strict mode.
pub(crate) fn single_job_opening(
    exp: &Experiment,
    spec: &SlurmSpec,
    out: &Path,
    what: &str,
    suffix: &str,
    log: &str,
) -> String {
    let mut s = String::from("#!/bin/bash\n");
    let _ = writeln!(s, "# termwise study `{}`: {what}", exp.study.name);
    let _ = writeln!(
        s,
        "#SBATCH --job-name={}-{suffix}",
        job_name(&exp.study.name)
    );
    common_options(&mut s, spec, &spec.report_time);
    let _ = writeln!(
        s,
        "#SBATCH --output={}/slurm/logs/{log}-%j.out",
        out.display()
    );
    s.push_str("set -euo pipefail\n");
    s
}

/// The report job script: prints the run status and draws the report from whatever the array left.
pub fn report_script(exp: &Experiment, exe: &Path, out: &Path, spec: &SlurmSpec) -> String {
    let mut s = single_job_opening(
        exp,
        spec,
        out,
        "draws report.html after the job array has ended (afterany).",
        "report",
        "report",
    );
    let _ = writeln!(s, "{} status {} || true", q(exe), q(out));
    let _ = writeln!(s, "exec {} report {}", q(exe), q(out));
    s
}

/// The submit script: queues the array, then the report job depending on it, and records both job ids.
pub fn submit_script(cells: &Path, report: &Path, slurm_dir: &Path) -> String {
    let ids = slurm_dir.join("job-ids");
    format!(
        "#!/bin/bash\n\
         # Submits the job array and the report job that waits for it (afterany: it runs even if some tasks fail).\n\
         set -euo pipefail\n\
         cells=$(sbatch --parsable {cells})\n\
         cells=${{cells%%;*}}   # --parsable prints `id;cluster` on multi-cluster setups\n\
         report=$(sbatch --parsable --dependency=afterany:\"$cells\" {report})\n\
         report=${{report%%;*}}\n\
         printf 'cells %s\\nreport %s\\n' \"$cells\" \"$report\" > {ids}\n\
         echo \"submitted: job array $cells (the runs) and job $report (the report, after the array)\"\n\
         echo \"job ids written to \"{ids}\n",
        cells = q(cells),
        report = q(report),
        ids = q(&ids),
    )
}

fn io(path: &Path) -> impl FnOnce(std::io::Error) -> StudyError + '_ {
    move |source| StudyError::Io {
        path: path.to_path_buf(),
        source,
    }
}

pub(super) fn write_executable(path: &Path, text: &str) -> Result<(), StudyError> {
    write_atomic(path, text.as_bytes()).map_err(io(path))?;
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        std::fs::set_permissions(path, std::fs::Permissions::from_mode(0o755)).map_err(io(path))?;
    }
    Ok(())
}

fn absolute(p: &Path) -> Result<PathBuf, StudyError> {
    std::fs::canonicalize(p).map_err(io(p))
}

/// Write the three scripts into `<out>/slurm/` (and study.json into `out`) for the experiment at `experiment`,
/// to be run by the binary `exe`. Refuses a folder holding results of a different configuration.
pub fn write_scripts(
    experiment_path: &Path,
    out: &Path,
    exe: &Path,
    spec: &SlurmSpec,
) -> Result<SlurmFiles, StudyError> {
    spec.validate()?;
    let exp = experiment::load(experiment_path)?;
    let experiment_abs = absolute(experiment_path)?;
    let exe = absolute(exe)?;
    std::fs::create_dir_all(out).map_err(io(out))?;
    let out = absolute(out)?;
    let text = out.to_string_lossy();
    if text
        .chars()
        .any(|c| c.is_whitespace() || matches!(c, '"' | '\'' | '%' | '\\'))
    {
        return Err(SlurmError::Path(out.clone()).into());
    }
    let runs = plan_runs(&exp, &out);
    if runs.is_empty() {
        return Err(SlurmError::EmptyPlan.into());
    }
    let (todo, finished) = pending(&runs, &exp)?;
    debug_assert_eq!(todo.len() + finished, runs.len());
    layout::write_study_json(&out, &exp)?;
    let slurm_dir = out.join("slurm");
    let logs = slurm_dir.join("logs");
    std::fs::create_dir_all(&logs).map_err(io(&logs))?;
    if let Some(race) = &exp.racing {
        return super::slurm_race::write_raced(
            &exp,
            race,
            &experiment_abs,
            &out,
            &exe,
            spec,
            (&runs, finished),
        );
    }
    let files = SlurmFiles {
        cells: slurm_dir.join("cells.sbatch"),
        report: slurm_dir.join("report.sbatch"),
        submit: slurm_dir.join("submit.sh"),
        logs,
        runs: runs.len(),
        finished,
        stages: Vec::new(),
    };
    write_executable(
        &files.cells,
        &cells_script(&exp, &exe, &experiment_abs, &out, runs.len(), spec),
    )?;
    write_executable(&files.report, &report_script(&exp, &exe, &out, spec))?;
    write_executable(
        &files.submit,
        &submit_script(&files.cells, &files.report, &slurm_dir),
    )?;
    Ok(files)
}

/// The whole `termwise slurm` command: write the scripts and say how to submit them.
pub fn cli_slurm(
    experiment_path: &Path,
    out: Option<PathBuf>,
    spec: &SlurmSpec,
) -> Result<String, StudyError> {
    let out = match out {
        Some(o) => o,
        None => Path::new("results").join(experiment::load(experiment_path)?.study.name),
    };
    let exe = std::env::current_exe().map_err(io(Path::new("current executable")))?;
    let f = write_scripts(experiment_path, &out, &exe, spec)?;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "termwise: wrote Slurm scripts for {} runs ({} already finished):",
        f.runs, f.finished
    );
    if f.stages.is_empty() {
        let _ = writeln!(s, "  {}   job array, one task per run", f.cells.display());
        let _ = writeln!(s, "  {}   report job, after the array", f.report.display());
        let _ = writeln!(s, "  {}   submits both", f.submit.display());
    } else {
        let _ = writeln!(
            s,
            "  {}   racing stage 0: job array, one task per run",
            f.cells.display()
        );
        for p in &f.stages {
            let _ = writeln!(s, "  {}   racing: after the job before it", p.display());
        }
        let _ = writeln!(
            s,
            "  {}   report job, after the last stage",
            f.report.display()
        );
        let _ = writeln!(
            s,
            "  {}   submits them in order, each depending on the one before",
            f.submit.display()
        );
    }
    let _ = writeln!(s, "submit with:  bash {}", f.submit.display());
    let _ = writeln!(
        s,
        "follow with:  {} status {}",
        exe.display(),
        out.display()
    );
    let _ = write!(s, "logs in:      {}", f.logs.display());
    Ok(s)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn time_and_mem_formats() {
        // Formats accepted by sbatch's --time and --mem (sbatch(1) manual page, from memory; a subset).
        for ok in ["04:00:00", "1-12:00:00", "100:59:59"] {
            assert_eq!(check_time(ok), Ok(()), "{ok}");
        }
        for bad in ["4h", "04:00", "04:60:00", "1-", "-04:00:00", "04:00:0x"] {
            assert!(check_time(bad).is_err(), "{bad}");
        }
        for ok in ["2G", "1500M", "512", "1T"] {
            assert_eq!(check_mem(ok), Ok(()), "{ok}");
        }
        for bad in ["", "G", "2GB", "0G", "-1G", "2 G"] {
            assert!(check_mem(bad).is_err(), "{bad}");
        }
        assert!(check_name("--partition", "gpu;rm").is_err());
        assert!(SlurmSpec {
            max_parallel: Some(0),
            ..Default::default()
        }
        .validate()
        .is_err());
    }

    #[test]
    fn shell_quoting_survives_quotes() {
        assert_eq!(shell_quote("/a b/it's"), r"'/a b/it'\''s'");
    }
}
