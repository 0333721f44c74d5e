//! Figures of one run: area under the success curve, steps to the success threshold (censored when
//! never reached), and final performance and motion quality over the last evaluations.

use super::load::RunResults;
use super::metric::{with_final, MetricId, METRICS};
use super::stats::{finite, mean};
use crate::results::{EvalRow, RunStatus, VariantKind};

/// Steps to reach the study's success threshold.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum Threshold {
    /// First evaluation with success_rate >= threshold was at this many env steps.
    Reached(u64),
    /// Never reached within a finished (done or diverged) run; the run ended at the budget or
    /// diverged. Ranked as worse than every reached run; the number is the budget.
    Censored(u64),
    /// Not reached yet and the run is unfinished (interrupted, running, missing): unknown.
    Pending,
    /// Baseline variants do not learn.
    NotApplicable,
}

impl Threshold {
    /// Value used for ranking and the IQM: reached steps, or the budget for censored runs.
    pub fn rank_value(&self) -> Option<f64> {
        match *self {
            Threshold::Reached(s) | Threshold::Censored(s) => Some(s as f64),
            Threshold::Pending | Threshold::NotApplicable => None,
        }
    }
}

/// Per-run figures. `None` means the figure is not defined for this run (see [`run_metrics`]).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct RunMetrics {
    /// Seed.
    pub seed: u64,
    /// Final status.
    #[serde(skip)]
    pub status: RunStatus,
    /// Evaluations written.
    pub evaluations: usize,
    /// Env steps at the last evaluation (0 when none).
    pub last_step: u64,
    /// Area under the success-rate curve divided by the area of a perfect curve, in [0, 1].
    pub auc: Option<f64>,
    /// Steps to the success threshold.
    pub steps_to_threshold: Threshold,
    /// Final figure of each metric in `METRICS` (the mean over the final window; None where undefined or
    /// for a metric without a final figure).
    pub finals: Vec<Option<f64>>,
}

impl RunMetrics {
    /// The final figure of metric `m` (None where undefined).
    pub fn figure(&self, m: MetricId) -> Option<f64> {
        self.finals.get(m.0).copied().flatten()
    }
}

/// What the study fixes for every run.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RunContext {
    /// Env steps per run.
    pub budget_steps: u64,
    /// Success level for steps-to-threshold.
    pub success_threshold: f64,
    /// Number of last evaluations averaged for final figures.
    pub final_window: usize,
    /// Learned or baseline.
    pub kind: VariantKind,
}

/// Compute the per-run figures.
///
/// Rules, so that no run is silently dropped or flattered:
/// - done: every figure from its rows.
/// - diverged: the policy after divergence is unusable, so its success counts as 0 from the last
///   evaluation to the budget (AUC), its final figures are `Final::diverged` (0 for the rates of
///   reaching the goal, else undefined), and a threshold not reached before divergence is censored.
/// - interrupted / running / missing: unfinished, so AUC and final figures are undefined; a threshold
///   already reached counts, otherwise it is pending.
/// - baseline: one evaluation; final figures from it, AUC and threshold not applicable.
pub fn run_metrics(run: &RunResults, ctx: &RunContext) -> RunMetrics {
    let rows = &run.progress;
    let mut m = RunMetrics {
        seed: run.seed,
        status: run.status,
        evaluations: rows.len(),
        last_step: rows.last().map_or(0, |r| r.env_steps),
        auc: None,
        steps_to_threshold: Threshold::NotApplicable,
        finals: vec![None; METRICS.len()],
    };
    if ctx.kind == VariantKind::Baseline {
        if run.status == RunStatus::Done && !rows.is_empty() {
            fill_final(&mut m, rows, ctx.final_window.max(1));
        }
        return m;
    }
    m.steps_to_threshold = match rows
        .iter()
        .find(|r| r.success_rate >= ctx.success_threshold)
    {
        Some(r) => Threshold::Reached(r.env_steps),
        None => match run.status {
            RunStatus::Done | RunStatus::Diverged => Threshold::Censored(ctx.budget_steps),
            _ => Threshold::Pending,
        },
    };
    match run.status {
        RunStatus::Done if !rows.is_empty() => {
            m.auc = Some(success_auc(rows, ctx.budget_steps, false));
            fill_final(&mut m, rows, ctx.final_window.max(1));
        }
        RunStatus::Diverged => {
            m.auc = if rows.is_empty() {
                Some(0.0)
            } else {
                Some(success_auc(rows, ctx.budget_steps, true))
            };
            for (id, _, f) in with_final() {
                m.finals[id.0] = f.diverged;
            }
        }
        _ => {}
    }
    m
}

fn fill_final(m: &mut RunMetrics, rows: &[EvalRow], window: usize) {
    let tail = &rows[rows.len().saturating_sub(window)..];
    for (id, metric, _) in with_final() {
        let v = finite(tail.iter().map(metric.value));
        m.finals[id.0] = (!v.is_empty()).then(|| mean(&v));
    }
}

/// Trapezoid area under success_rate(env_steps) from the first evaluation to the budget, divided by
/// the width of that span, so a run at 100% throughout scores 1. The curve is held at its last value
/// up to the budget, or drops to 0 right after the last evaluation when `diverged`.
pub fn success_auc(rows: &[EvalRow], budget: u64, diverged: bool) -> f64 {
    let mut pts: Vec<(f64, f64)> = rows
        .iter()
        .map(|r| (r.env_steps as f64, r.success_rate.clamp(0.0, 1.0)))
        .collect();
    let (last_x, last_y) = *pts.last().expect("rows not empty");
    let end = (budget as f64).max(last_x);
    if diverged {
        pts.push((last_x, 0.0));
        pts.push((end, 0.0));
    } else if end > last_x {
        pts.push((end, last_y));
    }
    let start = pts[0].0;
    if end <= start {
        return pts[0].1;
    }
    let area: f64 = pts
        .windows(2)
        .map(|w| (w[1].0 - w[0].0) * (w[0].1 + w[1].1) / 2.0)
        .sum();
    area / (end - start)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::metric::{COLLISION, REACHED, SUCCESS};
    use approx::assert_relative_eq;

    fn row(step: u64, success: f64) -> EvalRow {
        EvalRow {
            env_steps: step,
            success_rate: success,
            reached_rate: success,
            time_to_goal: f64::NAN,
            episode_steps: 100.0,
            rms_joint_acc: 1.0,
            peak_joint_acc: 2.0,
            rms_jerk: 3.0,
            path_length: 0.5,
            min_clearance: 0.1,
            ..EvalRow::default()
        }
    }

    fn run(status: RunStatus, rows: Vec<EvalRow>) -> RunResults {
        RunResults {
            seed: 0,
            status,
            meta: None,
            progress: rows,
            terms: Default::default(),
            training: Vec::new(),
            probes: Vec::new(),
        }
    }

    const CTX: RunContext = RunContext {
        budget_steps: 400,
        success_threshold: 0.8,
        final_window: 2,
        kind: VariantKind::Learned,
    };

    #[test]
    fn auc_is_the_normalised_trapezoid_area() {
        // Trapezoid rule (any numerical analysis text). Linear rise 0 -> 1 over [0, 400]:
        // area 200, span 400 -> 0.5.
        let rows = vec![row(0, 0.0), row(200, 0.5), row(400, 1.0)];
        assert_relative_eq!(success_auc(&rows, 400, false), 0.5);
        // Held flat at 1 from 200 to the budget: (0.5*200*1 + 200*1) / 400 = 0.75.
        let rows = vec![row(0, 0.0), row(200, 1.0)];
        assert_relative_eq!(success_auc(&rows, 400, false), 0.75);
        // Diverged after 200: 0 afterwards -> 100 / 400 = 0.25.
        assert_relative_eq!(success_auc(&rows, 400, true), 0.25);
    }

    #[test]
    fn threshold_is_censored_not_the_budget_and_pending_when_unfinished() {
        let never = vec![row(100, 0.1), row(200, 0.5), row(300, 0.79), row(400, 0.7)];
        let m = run_metrics(&run(RunStatus::Done, never.clone()), &CTX);
        assert_eq!(m.steps_to_threshold, Threshold::Censored(400));
        assert_relative_eq!(m.figure(SUCCESS).unwrap(), (0.79 + 0.7) / 2.0);
        let m = run_metrics(&run(RunStatus::Interrupted, never[..2].to_vec()), &CTX);
        assert_eq!(m.steps_to_threshold, Threshold::Pending);
        assert_eq!(m.figure(SUCCESS), None);
        assert_eq!(m.auc, None);
        let reached = vec![row(100, 0.2), row(200, 0.85), row(300, 0.9)];
        let m = run_metrics(&run(RunStatus::Interrupted, reached), &CTX);
        assert_eq!(m.steps_to_threshold, Threshold::Reached(200));
        let m = run_metrics(&run(RunStatus::Diverged, never[..2].to_vec()), &CTX);
        assert_eq!(m.steps_to_threshold, Threshold::Censored(400));
        assert_eq!(m.figure(SUCCESS), Some(0.0));
        assert_eq!(m.figure(REACHED), Some(0.0));
        assert_eq!(m.figure(COLLISION), None);
        // time_to_goal is NaN in every row (no success): undefined, not NaN-averaged.
        let m = run_metrics(&run(RunStatus::Done, never), &CTX);
        assert_eq!(
            m.figure(crate::analysis::metric::Metric::id("time_to_goal")),
            None
        );
    }
}
