//! Training health: what PPO did in each iteration (training.csv), averaged across a variant's seeds, with
//! the late-training figures a user debugging a reward looks at first (how far each update moved the
//! policy, how often the ratio was clipped, how much exploration is left, how well the value function
//! predicts the return).

use super::load::VariantRuns;
use super::stats::mean;

/// The per-iteration figures of one variant, each the mean across the seeds that have that iteration.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct TrainingHealth {
    /// Environment steps of each iteration (from the first seed that has it).
    pub steps: Vec<u64>,
    /// Approximate KL divergence old -> new of each update.
    pub approx_kl: Vec<f64>,
    /// Fraction of samples whose probability ratio was clipped.
    pub clip_fraction: Vec<f64>,
    /// Policy entropy, nats.
    pub entropy: Vec<f64>,
    /// Explained variance of the value predictions (1 = perfect, 0 = no better than the mean, < 0 worse).
    pub explained_variance: Vec<f64>,
    /// Value loss.
    pub value_loss: Vec<f64>,
    /// Adam step size.
    pub learning_rate: Vec<f64>,
    /// Seeds with a training.csv.
    pub seeds: usize,
    /// Means over the last quarter of the iterations: (approx KL, clip fraction, entropy, explained variance).
    pub late: [f64; 4],
    /// Plain-words warnings from `late` (see `warnings`).
    pub warnings: Vec<String>,
}

/// Late-training approximate KL above which updates are called large.
pub const KL_HIGH: f64 = 0.05;
/// Late-training clip fraction above which the ratio is called clipped too often.
pub const CLIP_HIGH: f64 = 0.3;

/// Warnings from the late-training figures. The thresholds are common practice for PPO with clip 0.2 (no
/// published source): an approximate KL above 0.05 or a clip fraction above 0.3 means each update moves
/// the policy further than the clipped objective is meant to allow; an explained variance below 0 means
/// the value function predicts the return worse than a constant, so the advantages are mostly noise.
pub fn warnings(late: &[f64; 4]) -> Vec<String> {
    let [kl, clip, _, ev] = *late;
    let mut w = Vec::new();
    if kl > KL_HIGH {
        w.push(format!(
            "approx KL {kl:.3} > {KL_HIGH}: updates move the policy far (lower learning_rate or epochs)"
        ));
    }
    if clip > CLIP_HIGH {
        w.push(format!(
            "clip fraction {clip:.2} > {CLIP_HIGH}: most samples are clipped (lower learning_rate or epochs)"
        ));
    }
    if ev < 0.0 {
        w.push(format!(
            "explained variance {ev:.2} < 0: the value function predicts the return worse than a constant (check the reward scale)"
        ));
    }
    w
}

/// The training health of a variant, or None when no run has written training.csv (baselines, older runs).
pub fn training_health(v: &VariantRuns) -> Option<TrainingHealth> {
    let tables: Vec<_> = v
        .runs
        .iter()
        .map(|r| &r.training)
        .filter(|t| !t.is_empty())
        .collect();
    if tables.is_empty() {
        return None;
    }
    let iterations = tables.iter().map(|t| t.len()).max().unwrap_or(0);
    let mut h = TrainingHealth {
        steps: Vec::with_capacity(iterations),
        approx_kl: Vec::with_capacity(iterations),
        clip_fraction: Vec::with_capacity(iterations),
        entropy: Vec::with_capacity(iterations),
        explained_variance: Vec::with_capacity(iterations),
        value_loss: Vec::with_capacity(iterations),
        learning_rate: Vec::with_capacity(iterations),
        seeds: tables.len(),
        late: [f64::NAN; 4],
        warnings: Vec::new(),
    };
    for k in 0..iterations {
        let rows: Vec<_> = tables.iter().filter_map(|t| t.get(k)).collect();
        let avg = |f: fn(&crate::results::TrainingRow) -> f64| {
            mean(&rows.iter().map(|r| f(r)).collect::<Vec<_>>())
        };
        h.steps.push(rows[0].env_steps);
        h.approx_kl.push(avg(|r| r.approx_kl));
        h.clip_fraction.push(avg(|r| r.clip_fraction));
        h.entropy.push(avg(|r| r.entropy));
        h.explained_variance.push(avg(|r| r.explained_variance));
        h.value_loss.push(avg(|r| r.value_loss));
        h.learning_rate.push(avg(|r| r.learning_rate));
    }
    let from = iterations - iterations.div_ceil(4);
    let tail = |xs: &[f64]| mean(&xs[from..]);
    h.late = [
        tail(&h.approx_kl),
        tail(&h.clip_fraction),
        tail(&h.entropy),
        tail(&h.explained_variance),
    ];
    h.warnings = warnings(&h.late);
    Some(h)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::load::RunResults;
    use crate::results::{RunStatus, TrainingRow, VariantKind, VariantRecord};

    fn run(seed: u64, rows: &[(u64, f64, f64)]) -> RunResults {
        RunResults {
            seed,
            status: RunStatus::Done,
            meta: None,
            progress: Vec::new(),
            terms: Default::default(),
            training: rows
                .iter()
                .enumerate()
                .map(|(k, &(steps, kl, ev))| TrainingRow {
                    iteration: k as u64,
                    env_steps: steps,
                    approx_kl: kl,
                    explained_variance: ev,
                    ..TrainingRow::default()
                })
                .collect(),
            probes: Vec::new(),
        }
    }

    #[test]
    fn means_across_seeds_and_late_quarter() {
        let v = VariantRuns {
            info: VariantRecord {
                name: "v".into(),
                kind: VariantKind::Learned,
                changes: Vec::new(),
                grid: None,
                curriculum: String::new(),
                eval_redraws: 0,
                eval_unsolved: 0,
            },
            runs: vec![
                run(
                    0,
                    &[
                        (10, 0.01, 0.5),
                        (20, 0.03, 0.7),
                        (30, 0.05, -0.5),
                        (40, 0.09, -0.7),
                    ],
                ),
                run(
                    1,
                    &[
                        (10, 0.03, 0.1),
                        (20, 0.05, 0.3),
                        (30, 0.07, -0.1),
                        (40, 0.11, -0.1),
                    ],
                ),
                run(2, &[]),
            ],
        };
        let h = training_health(&v).unwrap();
        // Hand-worked means of the two seeds with data.
        assert_eq!(h.seeds, 2);
        assert_eq!(h.steps, vec![10, 20, 30, 40]);
        assert!((h.approx_kl[0] - 0.02).abs() < 1e-12 && (h.approx_kl[3] - 0.10).abs() < 1e-12);
        // The last quarter of 4 iterations is the last one: KL 0.10, explained variance -0.4.
        assert!((h.late[0] - 0.10).abs() < 1e-12 && (h.late[3] + 0.4).abs() < 1e-12);
        assert_eq!(h.warnings.len(), 2, "{:?}", h.warnings);
        assert!(
            h.warnings[0].starts_with("approx KL")
                && h.warnings[1].starts_with("explained variance")
        );
    }

    #[test]
    fn no_training_tables_no_health() {
        let mut v = VariantRuns {
            info: VariantRecord {
                name: "controller".into(),
                kind: VariantKind::Baseline,
                changes: Vec::new(),
                grid: None,
                curriculum: String::new(),
                eval_redraws: 0,
                eval_unsolved: 0,
            },
            runs: vec![run(0, &[])],
        };
        assert!(training_health(&v).is_none());
        v.runs.clear();
        assert!(training_health(&v).is_none());
    }
}
