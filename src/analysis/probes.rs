//! Probe conditions across seeds: for every variant and probe the IQM clean success of the final policies
//! with its stratified bootstrap interval (the controller: a Wilson interval over the probe's episodes), the
//! drop from the training condition (per run: probe success minus the same policy's last evaluation, then
//! IQM across seeds), and which learned variant is most robust — ranked by each run's mean clean success over
//! the probes and grouped by the report's rank-group rule (`groups::rank_groups`).

use super::bootstrap::{stratified_bootstrap, stream_seed, BootstrapSpec, Estimate};
use super::groups::{rank_groups, Ranked};
use super::load::{RunResults, StudyResults};
use super::stats::{iqm, mean, wilson_interval};
use crate::results::{ProbeRecord, RunStatus, VariantKind};

/// Labels of the probe figures' bootstrap streams.
const TAG_PROBES: u64 = 0x7072_6f62;
const TAG_SUCCESS: u64 = 1;
const TAG_DROP: u64 = 2;
const TAG_ROBUST: u64 = 3;

/// One variant on one probe (or on the training condition).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ProbeCell {
    /// Runs behind the figures.
    pub runs: usize,
    /// Clean success: IQM across runs with its interval (the controller: its rate with a Wilson interval).
    pub success: Estimate,
    /// Clean success minus the training condition's, per run, then IQM with its interval (the controller:
    /// the point only).
    pub drop: Estimate,
}

/// A learned variant in the robustness ranking.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Robust {
    /// Variant index.
    pub index: usize,
    /// Each run's mean clean success over the probes: IQM across runs with its interval.
    pub score: Estimate,
    /// Rank group (0 = cannot be told apart from the most robust).
    pub group: usize,
    /// Difference to the leader of its group with its interval at `ProbeSummary::level`.
    pub diff: Estimate,
    /// The leader it was compared with.
    pub leader: usize,
}

/// The probe figures of a study.
#[derive(Debug, Clone, PartialEq)]
pub struct ProbeSummary {
    /// The probes, in the study's order.
    pub probes: Vec<ProbeRecord>,
    /// `cells[variant][probe]`; None when no run of the variant has that probe's row yet.
    pub cells: Vec<Vec<Option<ProbeCell>>>,
    /// The training condition per variant: the last evaluation of the policies probed.
    pub training: Vec<Option<ProbeCell>>,
    /// Learned variants with every probe, most robust first.
    pub robust: Vec<Robust>,
    /// Confidence of the robustness intervals (Bonferroni-adjusted).
    pub level: f64,
    /// Finished runs still without a row for some probe (run `termwise probe` or `termwise run`).
    pub unprobed: usize,
}

/// Per run: (training-condition success, success on each probe). Done runs with every probe row; diverged
/// runs count as failures everywhere (as in the final figures).
fn run_rows(r: &RunResults, probes: &[ProbeRecord]) -> Option<(f64, Vec<f64>)> {
    match r.status {
        RunStatus::Diverged => Some((0.0, vec![0.0; probes.len()])),
        RunStatus::Done => {
            let training = r.progress.last()?.success_rate;
            let per: Option<Vec<f64>> = probes
                .iter()
                .map(|p| {
                    r.probes
                        .iter()
                        .find(|x| x.probe == p.name)
                        .map(|x| x.success_rate)
                })
                .collect();
            Some((training, per?))
        }
        _ => None,
    }
}

/// Summarise the probe rows of a study (None when it has no probes).
pub fn summarize_probes(
    results: &StudyResults,
    spec: BootstrapSpec,
    seed: u64,
) -> Option<ProbeSummary> {
    let probes = results.study.probes.clone();
    if probes.is_empty() {
        return None;
    }
    let mut cells = Vec::new();
    let mut training = Vec::new();
    let mut scores: Vec<(usize, Vec<f64>)> = Vec::new();
    let mut unprobed = 0;
    for (vi, v) in results.variants.iter().enumerate() {
        let rows: Vec<(f64, Vec<f64>)> = v
            .runs
            .iter()
            .filter_map(|r| {
                let x = run_rows(r, &probes);
                unprobed += usize::from(x.is_none() && r.status == RunStatus::Done);
                x
            })
            .collect();
        let stream = |p: u64, tag: u64| stream_seed(seed, &[TAG_PROBES, vi as u64, p, tag]);
        let baseline = v.info.kind == VariantKind::Baseline;
        let cell = |xs: &[f64], base: &[f64], p: u64, episodes: u64| -> Option<ProbeCell> {
            if xs.is_empty() {
                return None;
            }
            let drops: Vec<f64> = xs.iter().zip(base).map(|(a, b)| a - b).collect();
            if baseline {
                let k = (xs[0] * episodes as f64).round();
                let (lo, hi) = wilson_interval(k, episodes as f64, spec.confidence);
                let point = |x: f64| Estimate {
                    point: x,
                    lo: f64::NAN,
                    hi: f64::NAN,
                };
                return Some(ProbeCell {
                    runs: 1,
                    success: Estimate {
                        point: xs[0],
                        lo,
                        hi,
                    },
                    drop: point(drops[0]),
                });
            }
            let boot =
                |ys: &[f64], tag| stratified_bootstrap(&[ys], |s| iqm(&s[0]), spec, stream(p, tag));
            Some(ProbeCell {
                runs: xs.len(),
                success: boot(xs, TAG_SUCCESS),
                drop: boot(&drops, TAG_DROP),
            })
        };
        let base: Vec<f64> = rows.iter().map(|r| r.0).collect();
        let episodes = results.study.eval_episodes;
        training.push(cell(&base, &base, u64::MAX, episodes));
        let mut row = Vec::new();
        for (k, p) in probes.iter().enumerate() {
            let xs: Vec<f64> = rows.iter().map(|r| r.1[k]).collect();
            row.push(cell(&xs, &base, k as u64, p.episodes));
        }
        cells.push(row);
        if !baseline && !rows.is_empty() {
            scores.push((vi, rows.iter().map(|r| mean(&r.1)).collect()));
        }
    }
    let (robust, level) = robustness(&scores, spec, seed);
    Some(ProbeSummary {
        probes,
        cells,
        training,
        robust,
        level,
        unprobed,
    })
}

/// Rank learned variants by the IQM of their runs' mean probe success and group them by the report's rule.
fn robustness(scores: &[(usize, Vec<f64>)], spec: BootstrapSpec, seed: u64) -> (Vec<Robust>, f64) {
    let mut order: Vec<usize> = (0..scores.len()).collect();
    order.sort_by(|&a, &b| {
        iqm(&scores[b].1)
            .total_cmp(&iqm(&scores[a].1))
            .then(scores[a].0.cmp(&scores[b].0))
    });
    let ranked: Vec<Ranked> = order
        .iter()
        .map(|&k| Ranked {
            index: scores[k].0,
            steps: &[],
            success: &scores[k].1,
        })
        .collect();
    let g = rank_groups(
        &ranked,
        spec.confidence,
        spec.resamples,
        stream_seed(seed, &[TAG_PROBES, TAG_ROBUST]),
    );
    let robust = g
        .placed
        .iter()
        .zip(&order)
        .map(|(p, &k)| Robust {
            index: p.index,
            score: stratified_bootstrap(
                &[&scores[k].1],
                |s| iqm(&s[0]),
                spec,
                stream_seed(seed, &[TAG_PROBES, p.index as u64, TAG_ROBUST]),
            ),
            group: p.group,
            diff: p.success_diff,
            leader: p.leader,
        })
        .collect();
    (robust, g.level)
}
