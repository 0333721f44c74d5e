//! `termwise status`: how far a study has got, read from its results folder alone — runs done, running,
//! stale (a `running` run whose heartbeat stopped: its process died), diverged, interrupted or missing.

use super::lock::{self, Holder};
use super::StudyError;
use crate::results::{read_run, RunStatus, StudyRecord, VariantKind};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// Seconds without a heartbeat after which a `running` run is reported as stale. Default of `--stale-after`.
pub const DEFAULT_STALE_AFTER_S: u64 = 600;

/// Where one planned run stands.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum CellState {
    Done,
    /// `running` with a recent heartbeat.
    Running,
    /// `running` but the heartbeat is older than the stale limit: the process is gone.
    Stale,
    Diverged,
    Interrupted,
    /// Planned in study.json but without a run.json.
    Missing,
    /// A run.json that cannot be read or parsed (the run restarts when run again).
    Unreadable,
    /// Racing: a run the study does not need (its variant stopped, or no seed of the reinvested budget).
    NotNeeded,
    /// Racing: a run needed only if a rung still to be decided keeps its variant.
    Later,
}

impl CellState {
    pub fn as_str(self) -> &'static str {
        match self {
            CellState::Done => "done",
            CellState::Running => "running",
            CellState::Stale => "stale",
            CellState::Diverged => "diverged",
            CellState::Interrupted => "interrupted",
            CellState::Missing => "missing",
            CellState::Unreadable => "unreadable",
            CellState::NotNeeded => "not needed (racing)",
            CellState::Later => "after a racing decision",
        }
    }
    /// True when running the cell again is needed to finish the study.
    pub fn needs_rerun(self) -> bool {
        matches!(
            self,
            CellState::Stale | CellState::Interrupted | CellState::Missing | CellState::Unreadable
        )
    }
}

/// One planned run and its state.
#[derive(Clone, Debug)]
pub struct CellStatus {
    /// Position in the plan (the `--cell` index and the array task id).
    pub cell: usize,
    pub variant: String,
    pub seed: u64,
    pub state: CellState,
    /// Environment steps reached (0 when missing).
    pub env_steps: u64,
    /// Measured environment steps per second of the run (0 when missing or not started).
    pub steps_per_second: f64,
    /// Seconds since the last heartbeat (`None` when missing).
    pub heartbeat_age_s: Option<u64>,
    /// Why the state is what it is, when that needs saying (a dead lock owner, an unreadable run.json).
    pub note: Option<String>,
}

/// The state of every planned run of a study.
#[derive(Clone, Debug)]
pub struct StudyStatus {
    pub dir: PathBuf,
    pub name: String,
    pub budget_steps: u64,
    pub cells: Vec<CellStatus>,
}

impl StudyStatus {
    pub fn count(&self, s: CellState) -> usize {
        self.cells.iter().filter(|c| c.state == s).count()
    }
    /// The cells that must run again to finish the study.
    pub fn to_rerun(&self) -> Vec<usize> {
        self.cells
            .iter()
            .filter(|c| c.state.needs_rerun())
            .map(|c| c.cell)
            .collect()
    }
}

/// Classify one run.json (or its absence) at time `now_unix`.
pub fn classify(status: Option<(RunStatus, u64)>, now_unix: u64, stale_after_s: u64) -> CellState {
    match status {
        None | Some((RunStatus::Missing, _)) => CellState::Missing,
        Some((RunStatus::Done, _)) => CellState::Done,
        Some((RunStatus::Diverged, _)) => CellState::Diverged,
        Some((RunStatus::Interrupted, _)) => CellState::Interrupted,
        Some((RunStatus::Running, beat)) if now_unix.saturating_sub(beat) > stale_after_s => {
            CellState::Stale
        }
        Some((RunStatus::Running, _)) => CellState::Running,
    }
}

/// Read study.json and every planned run.json under `dir`. The plan is the one `termwise run` uses:
/// variant-major, all seeds of a learned variant, seed 0 only of a baseline.
pub fn study_status(
    dir: &Path,
    now_unix: u64,
    stale_after_s: u64,
) -> Result<StudyStatus, StudyError> {
    let study_file = dir.join(crate::results::STUDY_FILE);
    if !study_file.exists() {
        return Err(StudyError::Mismatch(format!(
            "{} not found: is this a results folder written by `termwise run`?",
            study_file.display()
        )));
    }
    let rec: StudyRecord = crate::results::read_study(dir)?;
    let mut cells = Vec::new();
    let order: Vec<(usize, u64)> = match &rec.racing {
        None => rec
            .variants
            .iter()
            .enumerate()
            .flat_map(|(vi, v)| {
                let seeds: Vec<u64> = if v.kind == VariantKind::Baseline {
                    vec![0]
                } else {
                    rec.seeds.clone()
                };
                seeds.into_iter().map(move |s| (vi, s))
            })
            .collect(),
        Some(plan) => {
            let kinds: Vec<VariantKind> = rec.variants.iter().map(|v| v.kind).collect();
            super::race::cell_order(&kinds, &plan.rung_seeds, plan.max_seeds)
        }
    };
    let racing = match &rec.racing {
        Some(_) => crate::results::read_racing(dir)?,
        None => None,
    };
    for (vi, seed) in order {
        let v = &rec.variants[vi];
        {
            if let Some(plan) = &rec.racing {
                let planned = crate::analysis::load::planned_seeds(&rec, racing.as_ref(), v);
                let done_racing = racing
                    .as_ref()
                    .is_some_and(|r| r.rungs.len() == plan.rung_seeds.len());
                let stopped = racing
                    .as_ref()
                    .and_then(|r| r.variants.iter().find(|x| x.name == v.name))
                    .and_then(|x| x.stopped_at);
                let wanted = v.kind == VariantKind::Baseline && seed == 0
                    || v.kind == VariantKind::Learned && planned.contains(&seed);
                if !wanted {
                    let (state, note) = match stopped {
                        Some(k) => (
                            CellState::NotNeeded,
                            format!("racing stopped {} at rung {k}", v.name),
                        ),
                        None if done_racing => (
                            CellState::NotNeeded,
                            "beyond the seeds racing gave it".to_string(),
                        ),
                        None => (
                            CellState::Later,
                            "needed if the next rung keeps its variant".to_string(),
                        ),
                    };
                    cells.push(CellStatus {
                        cell: cells.len(),
                        variant: v.name.clone(),
                        seed,
                        state,
                        env_steps: 0,
                        steps_per_second: 0.0,
                        heartbeat_age_s: None,
                        note: Some(note),
                    });
                    continue;
                }
            }
            let run_dir = crate::results::run_dir(dir, &v.name, seed);
            let (run, mut state, mut note) =
                match read_run(&run_dir).map_err(|e| crate::error_chain::error_chain_text(&e)) {
                    Ok(run) => {
                        let state = classify(
                            run.as_ref().map(|r| (r.status, r.heartbeat_unix)),
                            now_unix,
                            stale_after_s,
                        );
                        (run, state, None)
                    }
                    Err(why) => (None, CellState::Unreadable, Some(why)),
                };
            if state == CellState::Running {
                // The run's lock says at once whether its process is alive (same host) or gone.
                let dead = match lock::holder(&run_dir, now_unix, stale_after_s) {
                    Holder::Live(_) => None,
                    Holder::Stale(owner) => Some(format!("its lock holder, {owner}, is gone")),
                    Holder::Free => Some("no process holds its lock".to_string()),
                };
                // The run may have finished between the two reads: look again before calling it stale.
                let again = read_run(&run_dir).ok().flatten();
                if let (Some(why), Some(r)) = (dead, &again) {
                    if r.status == RunStatus::Running {
                        state = CellState::Stale;
                        note = Some(why);
                    } else {
                        state =
                            classify(Some((r.status, r.heartbeat_unix)), now_unix, stale_after_s);
                    }
                }
            }
            cells.push(CellStatus {
                cell: cells.len(),
                variant: v.name.clone(),
                seed,
                state,
                env_steps: run.as_ref().map_or(0, |r| r.env_steps),
                steps_per_second: run.as_ref().map_or(0.0, |r| r.steps_per_second),
                heartbeat_age_s: run.map(|r| now_unix.saturating_sub(r.heartbeat_unix)),
                note,
            });
        }
    }
    Ok(StudyStatus {
        dir: dir.to_path_buf(),
        name: rec.name,
        budget_steps: rec.budget_steps,
        cells,
    })
}

/// Cell indices as a compact list for `sbatch --array` (e.g. `0-2,5,7-8`).
pub fn cell_ranges(cells: &[usize]) -> String {
    let mut parts = Vec::new();
    let mut i = 0;
    while i < cells.len() {
        let start = cells[i];
        let mut end = start;
        while i + 1 < cells.len() && cells[i + 1] == end + 1 {
            i += 1;
            end = cells[i];
        }
        parts.push(if start == end {
            start.to_string()
        } else {
            format!("{start}-{end}")
        });
        i += 1;
    }
    parts.join(",")
}

/// The status as text: one line of counts, then every run that is not done.
pub fn status_text(st: &StudyStatus, stale_after_s: u64) -> String {
    let mut s = String::new();
    let states = [
        CellState::Done,
        CellState::Running,
        CellState::Stale,
        CellState::Diverged,
        CellState::Interrupted,
        CellState::Missing,
        CellState::Unreadable,
        CellState::Later,
        CellState::NotNeeded,
    ];
    let optional = [
        CellState::Unreadable,
        CellState::Later,
        CellState::NotNeeded,
    ];
    let counts: Vec<String> = states
        .iter()
        .filter(|&&c| !optional.contains(&c) || st.count(c) > 0)
        .map(|&c| format!("{} {}", st.count(c), c.as_str()))
        .collect();
    let _ = writeln!(
        s,
        "study `{}` in {}: {} runs planned",
        st.name,
        st.dir.display(),
        st.cells.len()
    );
    let _ = writeln!(s, "  {}", counts.join(", "));
    let speeds: Vec<f64> = st
        .cells
        .iter()
        .map(|c| c.steps_per_second)
        .filter(|v| *v > 0.0)
        .collect();
    if !speeds.is_empty() {
        let mean = speeds.iter().sum::<f64>() / speeds.len() as f64;
        let (lo, hi) = speeds
            .iter()
            .fold((f64::INFINITY, 0.0f64), |(a, b), v| (a.min(*v), b.max(*v)));
        let _ = writeln!(
            s,
            "  measured speed: {mean:.0} environment steps/s per run (training and evaluation; {lo:.0} to {hi:.0} over {} runs)",
            speeds.len()
        );
    }
    let quiet = [CellState::Done, CellState::Later, CellState::NotNeeded];
    for c in st.cells.iter().filter(|c| !quiet.contains(&c.state)) {
        let age = c
            .heartbeat_age_s
            .map(|a| format!(", last heartbeat {a} s ago"))
            .unwrap_or_default();
        let note = c
            .note
            .as_ref()
            .map(|n| format!("; {n}"))
            .unwrap_or_default();
        let _ = writeln!(
            s,
            "  cell {:>3}: {} seed {}: {} ({} of {} steps{}{}{})",
            c.cell,
            c.variant,
            c.seed,
            c.state.as_str(),
            c.env_steps,
            st.budget_steps,
            if c.steps_per_second > 0.0 {
                format!(", {:.0} steps/s", c.steps_per_second)
            } else {
                String::new()
            },
            age,
            note
        );
    }
    if st.count(CellState::Stale) > 0 {
        let _ = writeln!(s, "  (stale: `running` but its process has died: the lock holder's process id is gone on this host, or no heartbeat for more than {stale_after_s} s)");
    }
    let rerun = st.to_rerun();
    let absent =
        st.count(CellState::Missing) + st.count(CellState::NotNeeded) + st.count(CellState::Later);
    let published = absent == st.cells.len()
        && st.count(CellState::Missing) > 0
        && (st.dir.join("summary.csv").is_file() || st.dir.join("report.html").is_file());
    if published {
        let _ = writeln!(
            s,
            "no run folders here, only the study's summary and report: a published result (per-run folders are not shipped), not an unfinished study. To reproduce it, run the experiment again (its file is recorded in study.json, `config_toml`): `termwise run FILE --out {}`",
            st.dir.display()
        );
    } else if !rerun.is_empty() {
        let script = st.dir.join("slurm").join("cells.sbatch");
        let staged = st.dir.join("slurm").join("cells-stage-0.sbatch");
        if staged.is_file() {
            let _ = writeln!(
                s,
                "to finish: a raced study runs stage by stage; submit again with `bash {}` (finished runs are skipped), or rerun cells {} with the stage script holding them",
                st.dir.join("slurm").join("submit.sh").display(),
                cell_ranges(&rerun)
            );
        } else if script.is_file() {
            let _ = writeln!(
                s,
                "to finish: run these cells again, e.g. `sbatch --array={} {}`",
                cell_ranges(&rerun),
                script.display()
            );
        } else {
            let _ = writeln!(
                s,
                "to finish: run the study again with `termwise run FILE --out {}` (finished runs are kept), or one cell at a time with `--cell K` (cells {})",
                st.dir.display(),
                cell_ranges(&rerun)
            );
        }
    }
    s
}

/// The whole `termwise status` command.
pub fn cli_status(dir: &Path, stale_after_s: u64) -> Result<String, StudyError> {
    let now = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_secs())
        .unwrap_or(0);
    Ok(status_text(
        &study_status(dir, now, stale_after_s)?,
        stale_after_s,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_folder_without_study_json_is_bad_input_and_says_what_it_lacks() {
        let dir =
            std::env::temp_dir().join(format!("termwise-status-empty-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let e = study_status(&dir, 0, 600).unwrap_err();
        std::fs::remove_dir_all(&dir).unwrap();
        assert!(e.is_bad_input(), "{e}");
        assert!(e.to_string().contains("study.json not found"), "{e}");
    }

    #[test]
    fn stale_only_after_the_limit() {
        let now = 10_000;
        assert_eq!(
            classify(Some((RunStatus::Running, now - 600)), now, 600),
            CellState::Running
        );
        assert_eq!(
            classify(Some((RunStatus::Running, now - 601)), now, 600),
            CellState::Stale
        );
        // A heartbeat from the future (clock skew between nodes) is not stale.
        assert_eq!(
            classify(Some((RunStatus::Running, now + 50)), now, 600),
            CellState::Running
        );
        assert_eq!(
            classify(Some((RunStatus::Done, 0)), now, 600),
            CellState::Done
        );
        assert_eq!(classify(None, now, 600), CellState::Missing);
    }

    #[test]
    fn ranges_are_compact() {
        assert_eq!(cell_ranges(&[0, 1, 2, 5, 7, 8]), "0-2,5,7-8");
        assert_eq!(cell_ranges(&[3]), "3");
        assert_eq!(cell_ranges(&[]), "");
    }
}
