//! The racing decision at one rung: which variants are clearly behind — by the report's intervals, never by
//! the point estimate alone. The variants are ranked as the report ranks them, and each is compared with the
//! leader by the report's rank-group intervals (steps ratio and clean-success difference, stratified bootstrap,
//! Bonferroni-adjusted; `groups::against_leader`); a variant stops when one of them lies entirely on the worse
//! side. Unlike the report's walk down the ranking, a variant is not stopped merely for ranking below one that
//! is: stopping is final, so it needs evidence against the variant itself.
//! Successive halving keeps the promising arms and stops the rest (Jamieson & Talwalkar, "Non-stochastic
//! best arm identification and hyperparameter optimization", AISTATS 2016; Li, Jamieson, DeSalvo,
//! Rostamizadeh, Talwalkar, "Hyperband", JMLR 18, 2017); here the arms stop only when the data separate
//! them from the leading group, so the number kept is not fixed in advance.

use super::bootstrap::Estimate;
use super::groups::{against_leader, rank_order, Ranked};
use super::load::RunResults;
use super::metric::SUCCESS;
use super::run_metrics::{run_metrics, RunContext};
use super::stats::{finite, iqm};

/// One racing variant's runs at a rung.
#[derive(Debug, Clone, Copy)]
pub struct Entrant<'a> {
    /// The variant's position in the study (labels its bootstrap streams).
    pub index: usize,
    /// Its finished runs for the seeds the rung covers.
    pub runs: &'a [RunResults],
}

/// What the rung decided for one variant, with the evidence.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Verdict {
    /// The variant's position in the study.
    pub index: usize,
    /// False when the variant is clearly behind and stops here.
    pub kept: bool,
    /// 0 when the intervals do not separate it from the leader, 1 when they put it behind.
    pub group: usize,
    /// Position in the rung's ranking (0 = leader).
    pub rank: usize,
    /// The leader it was compared with.
    pub leader: usize,
    /// IQM steps to threshold over its runs (censored at the budget).
    pub steps_iqm: f64,
    /// IQM final clean success over its runs.
    pub success_iqm: f64,
    /// IQM steps ratio to that leader with its interval at `Rung::level`.
    pub steps_ratio: Estimate,
    /// IQM clean-success difference to that leader with its interval at `Rung::level`.
    pub success_diff: Estimate,
}

/// A rung's decision.
#[derive(Debug, Clone, PartialEq)]
pub struct Rung {
    /// Confidence level of each interval (Bonferroni-adjusted).
    pub level: f64,
    /// One verdict per entrant, in ranking order.
    pub verdicts: Vec<Verdict>,
}

/// Decide a rung: rank the entrants as the report does (steps to threshold, then final clean success),
/// compare each with the leader at `confidence` (Bonferroni-adjusted), and stop those the intervals put behind.
/// Every entrant needs finished runs (done or diverged); `seed` labels the bootstrap streams of this rung.
pub fn decide_rung(
    entrants: &[Entrant],
    ctx: &RunContext,
    confidence: f64,
    resamples: usize,
    seed: u64,
) -> Rung {
    let figures: Vec<(Vec<f64>, Vec<f64>)> = entrants
        .iter()
        .map(|e| {
            let m: Vec<_> = e.runs.iter().map(|r| run_metrics(r, ctx)).collect();
            let steps = m
                .iter()
                .filter_map(|m| m.steps_to_threshold.rank_value())
                .collect();
            let success = finite(m.iter().filter_map(|m| m.figure(SUCCESS)));
            (steps, success)
        })
        .collect();
    let keys: Vec<(usize, f64, f64)> = figures
        .iter()
        .enumerate()
        .map(|(k, (steps, success))| (k, iqm(steps), iqm(success)))
        .collect();
    let order = rank_order(&keys);
    let ranked: Vec<Ranked> = order
        .iter()
        .map(|&k| Ranked {
            index: entrants[k].index,
            steps: &figures[k].0,
            success: &figures[k].1,
        })
        .collect();
    let g = against_leader(&ranked, confidence, resamples, seed);
    let verdicts = g
        .placed
        .iter()
        .zip(&order)
        .enumerate()
        .map(|(rank, (p, &k))| Verdict {
            index: p.index,
            kept: p.group == 0,
            group: p.group,
            rank,
            leader: p.leader,
            steps_iqm: keys[k].1,
            success_iqm: keys[k].2,
            steps_ratio: p.steps_ratio,
            success_diff: p.success_diff,
        })
        .collect();
    Rung {
        level: g.level,
        verdicts,
    }
}

#[cfg(test)]
#[path = "race_tests.rs"]
mod tests;
