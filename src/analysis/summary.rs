//! The study summary: learning curves across seeds with confidence bands, per-variant aggregates of
//! the per-run figures, comparisons against the reference variant, run status, and the
//! reward-gaming check. Everything the charts and the report draw comes from here.

use super::bootstrap::{
    bootstrap_distribution, percentile_interval, stratified_bootstrap, stream_seed, BootstrapSpec,
    Estimate,
};
use super::compare::{mann_whitney, normal_quantile, probability_of_improvement, MannWhitney};
use super::load::{StudyResults, VariantRuns};
use super::run_metrics::{run_metrics, RunContext, RunMetrics, Threshold};
use super::stats::{finite, iqm, mean, sample_std, wilson_interval};
use crate::results::{EvalRow, RunStatus, StudyRecord, VariantKind, VariantRecord};
use std::collections::BTreeMap;

/// Analysis settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AnalysisOptions {
    /// Bootstrap resamples per interval (default 2000).
    pub resamples: usize,
    /// Two-sided confidence level of every interval (default 0.95).
    pub confidence: f64,
    /// Seed of the bootstrap streams (default 0).
    pub seed: u64,
    /// Reward-gaming check: success must fall by at least this much (absolute success rate) from
    /// its peak to the final window (default 0.1).
    pub gaming_success_drop: f64,
    /// Reward-gaming check: return must rise over the same stretch by at least this fraction of the
    /// return curve's range (default 0.05).
    pub gaming_return_rise: f64,
    /// Crash check: the collision rate must rise by at least this much (absolute rate) from the
    /// evaluation with the longest episodes to the final window (default 0.1).
    pub crash_collision_rise: f64,
    /// Crash check: mean episode length must fall over the same stretch by at least this fraction
    /// of its longest value (default 0.1).
    pub crash_length_drop: f64,
    /// Statistical power the seeds-needed estimate aims at (default 0.8).
    pub power: f64,
}

impl Default for AnalysisOptions {
    fn default() -> Self {
        Self {
            resamples: 2000,
            confidence: 0.95,
            seed: 0,
            gaming_success_drop: 0.1,
            gaming_return_rise: 0.05,
            crash_collision_rise: 0.1,
            crash_length_drop: 0.1,
            power: 0.8,
        }
    }
}

impl AnalysisOptions {
    fn spec(&self) -> BootstrapSpec {
        BootstrapSpec {
            resamples: self.resamples,
            confidence: self.confidence,
        }
    }
}

/// Count of runs by status.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize)]
pub struct StatusCounts {
    /// Finished at the budget.
    pub done: usize,
    /// Stopped by non-finite numbers.
    pub diverged: usize,
    /// Stopped early.
    pub interrupted: usize,
    /// Still running (or died without a final status).
    pub running: usize,
    /// Not started / no run.json.
    pub missing: usize,
}

impl StatusCounts {
    /// Add one run.
    pub fn add(&mut self, s: RunStatus) {
        match s {
            RunStatus::Done => self.done += 1,
            RunStatus::Diverged => self.diverged += 1,
            RunStatus::Interrupted => self.interrupted += 1,
            RunStatus::Running => self.running += 1,
            RunStatus::Missing => self.missing += 1,
        }
    }
    /// Count for one status.
    pub fn get(&self, s: RunStatus) -> usize {
        match s {
            RunStatus::Done => self.done,
            RunStatus::Diverged => self.diverged,
            RunStatus::Interrupted => self.interrupted,
            RunStatus::Running => self.running,
            RunStatus::Missing => self.missing,
        }
    }
    /// All planned runs.
    pub fn total(&self) -> usize {
        self.done + self.diverged + self.interrupted + self.running + self.missing
    }
}

/// Across-seed statistics at one evaluation step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PointStat {
    /// Runs with a finite value at this step.
    pub n: usize,
    /// Mean with bootstrap CI.
    pub mean: Estimate,
    /// IQM with bootstrap CI.
    pub iqm: Estimate,
}

/// One learning-curve metric of a variant.
#[derive(Debug, Clone, PartialEq)]
pub struct Curve {
    /// Env steps of each point.
    pub steps: Vec<u64>,
    /// Statistics at each step.
    pub points: Vec<PointStat>,
}

/// The metrics drawn against env steps.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum CurveMetric {
    /// Clean success rate (goal reached, no contact), fraction.
    Success,
    /// Mean shaped return.
    Return,
    /// Time to goal, s.
    TimeToGoal,
    /// RMS joint acceleration, rad/s^2.
    RmsJointAcc,
    /// Curriculum difficulty, [0, 1].
    CurriculumLevel,
    /// Reached rate (goal reached, contact allowed), fraction.
    Reached,
    /// Collision rate (episodes with any contact), fraction.
    Collision,
    /// Mean episode length, control steps.
    EpisodeSteps,
}

impl CurveMetric {
    /// All curve metrics (new ones go at the end: the position labels each bootstrap stream).
    pub const ALL: [CurveMetric; 8] = [
        CurveMetric::Success,
        CurveMetric::Return,
        CurveMetric::TimeToGoal,
        CurveMetric::RmsJointAcc,
        CurveMetric::CurriculumLevel,
        CurveMetric::Reached,
        CurveMetric::Collision,
        CurveMetric::EpisodeSteps,
    ];

    /// Value of this metric in a progress row.
    pub fn of(self, r: &EvalRow) -> f64 {
        match self {
            CurveMetric::Success => r.success_rate,
            CurveMetric::Return => r.mean_return,
            CurveMetric::TimeToGoal => r.time_to_goal,
            CurveMetric::RmsJointAcc => r.rms_joint_acc,
            CurveMetric::CurriculumLevel => r.curriculum_level,
            CurveMetric::Reached => r.reached_rate,
            CurveMetric::Collision => r.collision_rate,
            CurveMetric::EpisodeSteps => r.episode_steps,
        }
    }
}

/// One seed's raw curve (for faint per-seed lines).
#[derive(Debug, Clone, PartialEq)]
pub struct SeedCurve {
    /// Seed.
    pub seed: u64,
    /// Run status.
    pub status: RunStatus,
    /// evaluations.csv rows.
    pub rows: Vec<EvalRow>,
}

/// Mean per-episode contribution of one reward term over training (mean across seeds).
#[derive(Debug, Clone, PartialEq)]
pub struct TermCurve {
    /// Term name.
    pub name: String,
    /// Env steps.
    pub steps: Vec<u64>,
    /// Mean contribution at each step.
    pub mean: Vec<f64>,
}

/// IQM and mean of one per-run figure across a variant's runs.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Aggregate {
    /// Runs with the figure defined.
    pub n: usize,
    /// IQM with bootstrap CI.
    pub iqm: Estimate,
    /// Mean with bootstrap CI.
    pub mean: Estimate,
}

/// Steps-to-threshold across a variant's runs.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct ThresholdAggregate {
    /// IQM (censored runs entered at the budget) with bootstrap CI.
    pub iqm: Estimate,
    /// Runs that reached the threshold.
    pub reached: usize,
    /// Finished runs that never reached it.
    pub censored: usize,
    /// Unfinished runs that have not reached it yet (excluded).
    pub pending: usize,
    /// True when censored runs fall inside the middle half, so the IQM is only a lower bound.
    pub lower_bound: bool,
}

/// Effect sizes of a variant against the reference, each with a stratified bootstrap CI over the
/// seeds of both variants (IQM on each side).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Effects {
    /// IQM steps-to-threshold of this variant divided by the reference's (below 1 = faster).
    pub steps_ratio: Estimate,
    /// IQM final clean success of this variant minus the reference's.
    pub success_diff: Estimate,
    /// IQM AUC of this variant minus the reference's.
    pub auc_diff: Estimate,
    /// IQM final collision rate of this variant minus the reference's (below 0 = fewer contacts).
    pub collision_diff: Estimate,
}

/// A variant against the reference variant.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Comparison {
    /// Effect sizes with CIs.
    pub effects: Effects,
    /// P(final success of this variant > reference's) with bootstrap CI.
    pub poi_final_success: Estimate,
    /// P(this variant needs fewer steps to the threshold) with bootstrap CI.
    pub poi_steps: Estimate,
    /// Mann-Whitney on final success.
    pub mw_final_success: Option<MannWhitney>,
    /// Mann-Whitney on steps-to-threshold (censored at the budget).
    pub mw_steps: Option<MannWhitney>,
}

/// Result of the reward-gaming check on the across-seed mean curves.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct GamingFlag {
    /// Env steps where mean success peaked.
    pub peak_step: u64,
    /// Peak mean success minus final-window mean success.
    pub success_drop: f64,
    /// Final-window mean return minus mean return at the peak, as a fraction of the return range.
    pub return_rise: f64,
}

/// Result of the crash check: episodes got shorter while the collision rate rose, the pattern of a
/// policy that ends its episodes by hitting something (e.g. when contact ends the episode and
/// per-step costs make an early end cheaper than reaching the goal).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct CrashFlag {
    /// Env steps where mean episode length was longest.
    pub from_step: u64,
    /// Final-window mean collision rate minus the rate there.
    pub collision_rise: f64,
    /// Fraction by which mean episode length fell from there to the final window.
    pub length_drop: f64,
}

/// The classical controller's figures with intervals over its evaluation episodes (it is
/// deterministic, so seeds add nothing): Wilson score intervals of each proportion.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct EpisodeLevel {
    /// Evaluation episodes behind each proportion.
    pub episodes: u64,
    /// Clean success rate with its Wilson interval.
    pub success: Estimate,
    /// Reached rate with its Wilson interval.
    pub reached: Estimate,
    /// Collision rate with its Wilson interval.
    pub collision: Estimate,
}

/// How a learned variant stands against the classical controller on one figure.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum Verdict {
    /// The variant's interval lies entirely on the better side of the controller's.
    Better,
    /// The variant's interval lies entirely on the worse side.
    Worse,
    /// The intervals overlap: the data do not tell them apart.
    Unclear,
}

/// Everything known about one variant.
#[derive(Debug, Clone, PartialEq)]
pub struct VariantSummary {
    /// Declaration from study.json.
    pub info: VariantRecord,
    /// Position in study.json (fixes the colour).
    pub index: usize,
    /// Run status counts.
    pub status: StatusCounts,
    /// Learning curves by metric.
    pub curves: BTreeMap<CurveMetric, Curve>,
    /// Raw per-seed curves.
    pub seed_curves: Vec<SeedCurve>,
    /// Reward-term attribution curves.
    pub terms: Vec<TermCurve>,
    /// Per-run figures.
    pub runs: Vec<RunMetrics>,
    /// Steps-to-threshold aggregate.
    pub steps_to_threshold: ThresholdAggregate,
    /// Area under the success curve.
    pub auc: Aggregate,
    /// Final clean success rate (goal reached, no contact). For a baseline the interval is
    /// episode-level (Wilson), see `episode_level`.
    pub final_success: Aggregate,
    /// Final reached rate (contact allowed).
    pub final_reached: Aggregate,
    /// Final collision rate.
    pub final_collision: Aggregate,
    /// Final mean episode length, control steps.
    pub episode_steps: Aggregate,
    /// Baselines: proportions with intervals over evaluation episodes.
    pub episode_level: Option<EpisodeLevel>,
    /// Final mean return.
    pub final_return: Aggregate,
    /// Final time to goal, s.
    pub time_to_goal: Aggregate,
    /// Final RMS joint acceleration, rad/s^2.
    pub rms_joint_acc: Aggregate,
    /// Final peak joint acceleration, rad/s^2.
    pub peak_joint_acc: Aggregate,
    /// Final RMS jerk, rad/s^3.
    pub rms_jerk: Aggregate,
    /// Final effector path length, m.
    pub path_length: Aggregate,
    /// Final minimum clearance, m.
    pub min_clearance: Aggregate,
    /// Final replans per episode.
    pub replans: Aggregate,
    /// Against the reference (None for the reference itself).
    pub vs_reference: Option<Comparison>,
    /// Set when return rose while clean success fell.
    pub gaming: Option<GamingFlag>,
    /// Set when episodes got shorter while the collision rate rose.
    pub crashing: Option<CrashFlag>,
    /// Rank group (0 = tied with the leader); None for baselines and unranked variants.
    pub group: Option<usize>,
}

/// The estimate of how many seeds would separate the top two learned variants.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct SeedsNeeded {
    /// Index of the leader.
    pub first: usize,
    /// Index of the runner-up.
    pub second: usize,
    /// Seeds per variant in the study now (the smaller side).
    pub seeds_now: usize,
    /// Observed log ratio of IQM steps-to-threshold, runner-up over leader.
    pub log_ratio: f64,
    /// Bootstrap standard deviation of that log ratio at `seeds_now`.
    pub sd: f64,
    /// Seeds per variant at which the difference would be expected to show at the study's
    /// confidence with the aimed power; None when no difference was observed.
    pub seeds: Option<usize>,
}

/// The whole study.
#[derive(Debug, Clone, PartialEq)]
pub struct StudySummary {
    /// study.json.
    pub study: StudyRecord,
    /// Name of the reference variant.
    pub reference: String,
    /// Options used.
    pub options: AnalysisOptions,
    /// Variants in declaration order.
    pub variants: Vec<VariantSummary>,
    /// Status counts over all runs.
    pub status: StatusCounts,
    /// Confidence level of the pairwise intervals behind the rank groups (the study's level,
    /// Bonferroni-adjusted for the number of pairwise comparisons made).
    pub group_confidence: f64,
    /// Seeds needed to separate the top two (None with fewer than two ranked variants).
    pub seeds_needed: Option<SeedsNeeded>,
    /// The leader, the head of the second rank group, and that head's steps-to-threshold IQM
    /// over the leader's with its CI at `group_confidence` (None when every ranked variant is
    /// tied with the leader).
    pub gap: Option<(usize, usize, Estimate)>,
}

impl StudySummary {
    /// Indices of the learned variants ranked best first: by steps-to-threshold IQM (fewer is
    /// better), ties and undefined values broken by final clean success IQM (higher is better).
    /// Baselines are yardsticks, not competitors: they are not ranked (see [`Self::baselines`]).
    pub fn ranking(&self) -> Vec<usize> {
        let mut idx: Vec<usize> = (0..self.variants.len())
            .filter(|&i| self.variants[i].info.kind == VariantKind::Learned)
            .collect();
        let key = |v: &VariantSummary| {
            let baseline = v.info.kind == VariantKind::Baseline;
            let steps = v.steps_to_threshold.iqm.point;
            let steps = if steps.is_finite() {
                steps
            } else {
                f64::INFINITY
            };
            let success = v.final_success.iqm.point;
            let success = if success.is_finite() {
                success
            } else {
                f64::NEG_INFINITY
            };
            (baseline, steps, -success)
        };
        idx.sort_by(|&a, &b| {
            let (ka, kb) = (key(&self.variants[a]), key(&self.variants[b]));
            ka.0.cmp(&kb.0)
                .then(ka.1.total_cmp(&kb.1))
                .then(ka.2.total_cmp(&kb.2))
                .then(a.cmp(&b))
        });
        idx
    }

    /// Indices of the baseline variants, in declaration order.
    pub fn baselines(&self) -> Vec<usize> {
        (0..self.variants.len())
            .filter(|&i| self.variants[i].info.kind == VariantKind::Baseline)
            .collect()
    }

    /// Ranked variants in rank group `g`, best first.
    pub fn group_members(&self, g: usize) -> Vec<usize> {
        self.ranking()
            .into_iter()
            .filter(|&i| self.variants[i].group == Some(g))
            .collect()
    }

    /// The variant with this name.
    pub fn variant(&self, name: &str) -> Option<&VariantSummary> {
        self.variants.iter().find(|v| v.info.name == name)
    }
}

// Labels that keep each figure's bootstrap stream separate (see `stream_seed`).
const TAG_CURVE_MEAN: u64 = 1;
const TAG_CURVE_IQM: u64 = 2;
const TAG_AGG_IQM: u64 = 3;
const TAG_AGG_MEAN: u64 = 4;
const TAG_STEPS: u64 = 5;
const TAG_POI_SUCCESS: u64 = 6;
const TAG_POI_STEPS: u64 = 7;
const TAG_EFFECT_STEPS: u64 = 30;
const TAG_EFFECT_SUCCESS: u64 = 31;
const TAG_EFFECT_AUC: u64 = 32;
const TAG_EFFECT_COLLISION: u64 = 33;
const TAG_GROUP_STEPS: u64 = 40;
const TAG_GROUP_SUCCESS: u64 = 41;

/// Summarise a loaded study.
pub fn summarize(results: &StudyResults, opts: &AnalysisOptions) -> StudySummary {
    let study = &results.study;
    let reference = if study.reference_variant.is_empty() {
        study.variants[0].name.clone()
    } else {
        study.reference_variant.clone()
    };
    let mut variants: Vec<VariantSummary> = results
        .variants
        .iter()
        .enumerate()
        .map(|(i, v)| summarize_variant(i, v, study, opts))
        .collect();
    let ref_runs = variants
        .iter()
        .find(|v| v.info.name == reference && v.info.kind == VariantKind::Learned)
        .map(|v| v.runs.clone());
    // Baselines get no p-value or probability of improvement: one deterministic run is not a
    // sample of seeds. They are compared through their episode-level intervals instead.
    if let Some(ref_runs) = ref_runs {
        for v in variants.iter_mut() {
            if v.info.name != reference && v.info.kind == VariantKind::Learned {
                v.vs_reference = Some(compare(v.index, &v.runs, &ref_runs, opts));
            }
        }
    }
    let mut status = StatusCounts::default();
    for v in &variants {
        for s in RunStatus::ALL {
            for _ in 0..v.status.get(s) {
                status.add(s);
            }
        }
    }
    let mut summary = StudySummary {
        study: study.clone(),
        reference,
        options: *opts,
        variants,
        status,
        group_confidence: opts.confidence,
        seeds_needed: None,
        gap: None,
    };
    assign_groups(&mut summary);
    summary.seeds_needed = seeds_needed(&summary);
    summary
}

fn steps_of(runs: &[RunMetrics]) -> Vec<f64> {
    runs.iter()
        .filter_map(|m| m.steps_to_threshold.rank_value())
        .collect()
}

fn success_of(runs: &[RunMetrics]) -> Vec<f64> {
    finite(runs.iter().filter_map(|m| m.final_success))
}

/// IQM ratio b / a of two samples (NaN when a's IQM is not positive).
fn iqm_ratio(s: &[Vec<f64>]) -> f64 {
    let d = iqm(&s[0]);
    if d > 0.0 {
        iqm(&s[1]) / d
    } else {
        f64::NAN
    }
}

/// Rank groups. Walk the ranking best first; each variant joins the group of the best variant
/// above it that heads a group (the group's leader) unless the data separate them: the
/// stratified bootstrap interval of its steps-to-threshold ratio to the leader lies entirely above
/// 1, or the interval of its final clean success minus the leader's lies entirely below 0.
/// Intervals are at the study's confidence, Bonferroni-adjusted for the number of comparisons
/// (Dunn, "Multiple comparisons among means", JASA 1961).
fn assign_groups(s: &mut StudySummary) {
    let order: Vec<usize> = s
        .ranking()
        .into_iter()
        .filter(|&i| s.variants[i].steps_to_threshold.iqm.point.is_finite())
        .collect();
    let comparisons = order.len().saturating_sub(1).max(1);
    let level = 1.0 - (1.0 - s.options.confidence) / comparisons as f64;
    s.group_confidence = level;
    let mut leader: Option<usize> = None;
    let mut group = 0usize;
    let mut gap = None;
    for &i in &order {
        let Some(l) = leader else {
            leader = Some(i);
            s.variants[i].group = Some(0);
            continue;
        };
        let (a, b) = (&s.variants[l].runs, &s.variants[i].runs);
        let seed = |tag| stream_seed(s.options.seed, &[l as u64, i as u64, tag]);
        let ratio = bootstrap_distribution(
            &[&steps_of(a), &steps_of(b)],
            iqm_ratio,
            s.options.resamples,
            seed(TAG_GROUP_STEPS),
        )
        .map(|(p, v)| percentile_interval(p, &v, level))
        .unwrap_or(Estimate::NONE);
        let diff = bootstrap_distribution(
            &[&success_of(a), &success_of(b)],
            |x| iqm(&x[1]) - iqm(&x[0]),
            s.options.resamples,
            seed(TAG_GROUP_SUCCESS),
        )
        .map(|(p, v)| percentile_interval(p, &v, level))
        .unwrap_or(Estimate::NONE);
        let slower = ratio.lo.is_finite() && ratio.lo > 1.0;
        let less_success = diff.hi.is_finite() && diff.hi < 0.0;
        if slower || less_success {
            group += 1;
            leader = Some(i);
            if group == 1 {
                // The first split is always against the overall leader.
                gap = Some((l, i, ratio));
            }
        }
        s.variants[i].group = Some(group);
    }
    s.gap = gap;
}

/// How many seeds per variant would separate the top two ranked variants on steps-to-threshold:
/// with d the observed log IQM ratio and sd its bootstrap standard deviation at n seeds, the
/// standard error shrinks as 1/sqrt(n), so a two-sided test at the study's confidence reaches the
/// aimed power at n' = n ((z_{1-alpha/2} + z_power) sd / |d|)^2 (the usual normal-approximation
/// sample-size formula, e.g. Chow, Shao, Wang, "Sample Size Calculations in Clinical Research",
/// 2008, Sec. 3.2). An estimate: it assumes the observed difference and spread are the true ones.
fn seeds_needed(s: &StudySummary) -> Option<SeedsNeeded> {
    let order: Vec<usize> = s
        .ranking()
        .into_iter()
        .filter(|&i| s.variants[i].steps_to_threshold.iqm.point.is_finite())
        .collect();
    let (&first, &second) = (order.first()?, order.get(1)?);
    let (a, b) = (
        steps_of(&s.variants[first].runs),
        steps_of(&s.variants[second].runs),
    );
    let (point, values) = bootstrap_distribution(
        &[&a, &b],
        |x| iqm_ratio(x).ln(),
        s.options.resamples,
        stream_seed(s.options.seed, &[first as u64, second as u64, 50]),
    )?;
    let sd = sample_std(&values);
    let seeds_now = a.len().min(b.len());
    let z = normal_quantile(0.5 + s.options.confidence / 2.0) + normal_quantile(s.options.power);
    let seeds = if point.is_finite() && point.abs() > 1e-12 && sd.is_finite() {
        let n = seeds_now as f64 * (z * sd / point.abs()).powi(2);
        Some(n.ceil().clamp(2.0, 1e6) as usize)
    } else {
        None
    };
    Some(SeedsNeeded {
        first,
        second,
        seeds_now,
        log_ratio: point,
        sd,
        seeds,
    })
}

/// How a learned variant's interval stands against the baseline's on one figure. `higher_better`
/// says which side is better. A baseline figure without an interval is compared as a point.
pub fn verdict(learned: &Estimate, baseline: &Estimate, higher_better: bool) -> Option<Verdict> {
    if !learned.lo.is_finite() || !baseline.point.is_finite() {
        return None;
    }
    let (blo, bhi) = if baseline.lo.is_finite() {
        (baseline.lo, baseline.hi)
    } else {
        (baseline.point, baseline.point)
    };
    let above = learned.lo > bhi;
    let below = learned.hi < blo;
    Some(match (above, below, higher_better) {
        (true, _, true) | (_, true, false) => Verdict::Better,
        (true, _, false) | (_, true, true) => Verdict::Worse,
        _ => Verdict::Unclear,
    })
}

fn summarize_variant(
    index: usize,
    v: &VariantRuns,
    study: &StudyRecord,
    opts: &AnalysisOptions,
) -> VariantSummary {
    let ctx = RunContext {
        budget_steps: study.budget_steps,
        success_threshold: study.success_threshold,
        final_window: study.final_window as usize,
        kind: v.info.kind,
    };
    let mut status = StatusCounts::default();
    for r in &v.runs {
        status.add(r.status);
    }
    let runs: Vec<RunMetrics> = v.runs.iter().map(|r| run_metrics(r, &ctx)).collect();
    let curves = CurveMetric::ALL
        .iter()
        .enumerate()
        .map(|(k, &metric)| (metric, curve(index, k as u64, v, metric, opts)))
        .collect::<BTreeMap<_, _>>();
    let seed_curves = v
        .runs
        .iter()
        .filter(|r| !r.progress.is_empty())
        .map(|r| SeedCurve {
            seed: r.seed,
            status: r.status,
            rows: r.progress.clone(),
        })
        .collect();
    let agg = |k: u64, f: fn(&RunMetrics) -> Option<f64>| aggregate(index, k, &runs, f, opts);
    let gaming = gaming_check(&curves, study.final_window as usize, opts);
    let crashing = crash_check(&curves, study.final_window as usize, opts);
    let mut final_success = agg(11, |m| m.final_success);
    let mut final_reached = agg(20, |m| m.final_reached);
    let mut final_collision = agg(21, |m| m.final_collision);
    let episode_level = if v.info.kind == VariantKind::Baseline && study.eval_episodes > 0 {
        episode_level(&runs, study.eval_episodes as u64, opts.confidence)
    } else {
        None
    };
    if let Some(e) = &episode_level {
        for (a, est) in [
            (&mut final_success, e.success),
            (&mut final_reached, e.reached),
            (&mut final_collision, e.collision),
        ] {
            a.iqm = est;
            a.mean = est;
        }
    }
    VariantSummary {
        steps_to_threshold: threshold_aggregate(index, &runs, opts),
        auc: agg(10, |m| m.auc),
        final_success,
        final_reached,
        final_collision,
        episode_steps: agg(22, |m| m.episode_steps),
        episode_level,
        final_return: agg(12, |m| m.final_return),
        time_to_goal: agg(13, |m| m.time_to_goal),
        rms_joint_acc: agg(14, |m| m.rms_joint_acc),
        peak_joint_acc: agg(15, |m| m.peak_joint_acc),
        rms_jerk: agg(16, |m| m.rms_jerk),
        path_length: agg(17, |m| m.path_length),
        min_clearance: agg(18, |m| m.min_clearance),
        replans: agg(19, |m| m.replans),
        info: v.info.clone(),
        index,
        status,
        curves,
        seed_curves,
        terms: term_curves(v),
        runs,
        vs_reference: None,
        gaming,
        crashing,
        group: None,
    }
}

/// Wilson intervals of the baseline's proportions over its evaluation episodes (first finished
/// run; its final window is one evaluation of `episodes` episodes).
fn episode_level(runs: &[RunMetrics], episodes: u64, confidence: f64) -> Option<EpisodeLevel> {
    let m = runs.iter().find(|m| m.final_success.is_some())?;
    let n = episodes as f64;
    let est = |p: Option<f64>| match p {
        Some(p) => {
            // The rate is a count out of n episodes; round to undo the printed decimals.
            let k = (p * n).round();
            let (lo, hi) = wilson_interval(k, n, confidence);
            Estimate { point: p, lo, hi }
        }
        None => Estimate::NONE,
    };
    Some(EpisodeLevel {
        episodes,
        success: est(m.final_success),
        reached: est(m.final_reached),
        collision: est(m.final_collision),
    })
}

/// Across-seed mean and IQM with CIs at every evaluation step present in any run.
fn curve(
    index: usize,
    metric_tag: u64,
    v: &VariantRuns,
    metric: CurveMetric,
    opts: &AnalysisOptions,
) -> Curve {
    let mut by_step: BTreeMap<u64, Vec<f64>> = BTreeMap::new();
    for r in &v.runs {
        for row in &r.progress {
            let entry = by_step.entry(row.env_steps).or_default();
            let x = metric.of(row);
            if x.is_finite() {
                entry.push(x);
            }
        }
    }
    let mut steps = Vec::with_capacity(by_step.len());
    let mut points = Vec::with_capacity(by_step.len());
    for (k, (step, xs)) in by_step.into_iter().enumerate() {
        let labels = |tag| stream_seed(opts.seed, &[index as u64, metric_tag, k as u64, tag]);
        steps.push(step);
        points.push(PointStat {
            n: xs.len(),
            mean: stratified_bootstrap(
                &[&xs],
                |s| mean(&s[0]),
                opts.spec(),
                labels(TAG_CURVE_MEAN),
            ),
            iqm: stratified_bootstrap(&[&xs], |s| iqm(&s[0]), opts.spec(), labels(TAG_CURVE_IQM)),
        });
    }
    Curve { steps, points }
}

fn aggregate(
    index: usize,
    tag: u64,
    runs: &[RunMetrics],
    f: fn(&RunMetrics) -> Option<f64>,
    opts: &AnalysisOptions,
) -> Aggregate {
    let xs = finite(runs.iter().filter_map(f));
    let seed = |t| stream_seed(opts.seed, &[index as u64, tag, t]);
    Aggregate {
        n: xs.len(),
        iqm: stratified_bootstrap(&[&xs], |s| iqm(&s[0]), opts.spec(), seed(TAG_AGG_IQM)),
        mean: stratified_bootstrap(&[&xs], |s| mean(&s[0]), opts.spec(), seed(TAG_AGG_MEAN)),
    }
}

fn threshold_aggregate(
    index: usize,
    runs: &[RunMetrics],
    opts: &AnalysisOptions,
) -> ThresholdAggregate {
    let mut reached = 0;
    let mut censored = 0;
    let mut pending = 0;
    for m in runs {
        match m.steps_to_threshold {
            Threshold::Reached(_) => reached += 1,
            Threshold::Censored(_) => censored += 1,
            Threshold::Pending if m.status != RunStatus::Missing => pending += 1,
            _ => {}
        }
    }
    let xs: Vec<f64> = runs
        .iter()
        .filter_map(|m| m.steps_to_threshold.rank_value())
        .collect();
    let cut = xs.len() / 4;
    ThresholdAggregate {
        iqm: stratified_bootstrap(
            &[&xs],
            |s| iqm(&s[0]),
            opts.spec(),
            stream_seed(opts.seed, &[index as u64, TAG_STEPS]),
        ),
        reached,
        censored,
        pending,
        lower_bound: censored > cut,
    }
}

fn compare(index: usize, x: &[RunMetrics], y: &[RunMetrics], opts: &AnalysisOptions) -> Comparison {
    let success = |r: &[RunMetrics]| finite(r.iter().filter_map(|m| m.final_success));
    // Fewer steps is better: negate so that "greater" means "better" for P(X > Y).
    let steps = |r: &[RunMetrics]| -> Vec<f64> {
        r.iter()
            .filter_map(|m| m.steps_to_threshold.rank_value())
            .map(|s| -s)
            .collect()
    };
    let (sx, sy) = (success(x), success(y));
    let (tx, ty) = (steps(x), steps(y));
    let poi = |a: &[f64], b: &[f64], tag| {
        stratified_bootstrap(
            &[a, b],
            |s| probability_of_improvement(&s[0], &s[1]),
            opts.spec(),
            stream_seed(opts.seed, &[index as u64, tag]),
        )
    };
    let pair = |a: &[f64], b: &[f64], tag, f: fn(&[Vec<f64>]) -> f64| {
        stratified_bootstrap(
            &[a, b],
            f,
            opts.spec(),
            stream_seed(opts.seed, &[index as u64, tag]),
        )
    };
    let auc = |r: &[RunMetrics]| finite(r.iter().filter_map(|m| m.auc));
    let coll = |r: &[RunMetrics]| finite(r.iter().filter_map(|m| m.final_collision));
    let diff: fn(&[Vec<f64>]) -> f64 = |s| iqm(&s[0]) - iqm(&s[1]);
    // Ratio this / reference: the reference is the second stratum.
    let ratio: fn(&[Vec<f64>]) -> f64 = |s| {
        let d = iqm(&s[1]);
        if d > 0.0 {
            iqm(&s[0]) / d
        } else {
            f64::NAN
        }
    };
    let effects = Effects {
        steps_ratio: pair(&steps_of(x), &steps_of(y), TAG_EFFECT_STEPS, ratio),
        success_diff: pair(&sx, &sy, TAG_EFFECT_SUCCESS, diff),
        auc_diff: pair(&auc(x), &auc(y), TAG_EFFECT_AUC, diff),
        collision_diff: pair(&coll(x), &coll(y), TAG_EFFECT_COLLISION, diff),
    };
    Comparison {
        effects,
        poi_final_success: poi(&sx, &sy, TAG_POI_SUCCESS),
        poi_steps: poi(&tx, &ty, TAG_POI_STEPS),
        mw_final_success: mann_whitney(&sx, &sy),
        mw_steps: mann_whitney(&tx, &ty),
    }
}

/// Mean contribution of each reward term at each step, across the variant's runs.
fn term_curves(v: &VariantRuns) -> Vec<TermCurve> {
    let mut names: Vec<String> = Vec::new();
    for r in &v.runs {
        for n in &r.terms.names {
            if !names.contains(n) {
                names.push(n.clone());
            }
        }
    }
    names
        .into_iter()
        .map(|name| {
            let mut by_step: BTreeMap<u64, Vec<f64>> = BTreeMap::new();
            for r in &v.runs {
                if let Some(col) = r.terms.names.iter().position(|n| *n == name) {
                    for (step, row) in r.terms.steps.iter().zip(&r.terms.values) {
                        if let Some(&x) = row.get(col).filter(|x| x.is_finite()) {
                            by_step.entry(*step).or_default().push(x);
                        }
                    }
                }
            }
            TermCurve {
                name,
                steps: by_step.keys().copied().collect(),
                mean: by_step.values().map(|xs| mean(xs)).collect(),
            }
        })
        .collect()
}

/// Flag a variant whose mean return rose while its mean success fell: success peaked and then
/// dropped by at least `gaming_success_drop` by the final window, while the return at the end
/// exceeds the return at the success peak by at least `gaming_return_rise` of the return range.
fn gaming_check(
    curves: &BTreeMap<CurveMetric, Curve>,
    final_window: usize,
    opts: &AnalysisOptions,
) -> Option<GamingFlag> {
    let succ = &curves[&CurveMetric::Success];
    let ret = &curves[&CurveMetric::Return];
    if succ.steps.len() < 3 || succ.steps != ret.steps {
        return None;
    }
    let s: Vec<f64> = succ.points.iter().map(|p| p.mean.point).collect();
    let r: Vec<f64> = ret.points.iter().map(|p| p.mean.point).collect();
    let window = final_window.clamp(1, s.len() - 1);
    let peak = (0..s.len() - window).max_by(|&a, &b| s[a].total_cmp(&s[b]))?;
    let tail = s.len() - window..s.len();
    let s_end = mean(&finite(s[tail.clone()].iter().copied()));
    let r_end = mean(&finite(r[tail].iter().copied()));
    let fin = finite(r.iter().copied());
    let range = fin.iter().copied().fold(f64::NEG_INFINITY, f64::max)
        - fin.iter().copied().fold(f64::INFINITY, f64::min);
    if range.is_nan() || range <= 0.0 {
        return None;
    }
    let drop = s[peak] - s_end;
    let rise = (r_end - r[peak]) / range;
    (drop >= opts.gaming_success_drop && rise >= opts.gaming_return_rise).then_some(GamingFlag {
        peak_step: succ.steps[peak],
        success_drop: drop,
        return_rise: rise,
    })
}

/// Flag a variant whose episodes got shorter through collisions: from the evaluation (before the
/// final window) where the across-seed mean episode length was longest, the length fell by at
/// least `crash_length_drop` of that value by the final window while the mean collision rate
/// rose by at least `crash_collision_rise`, and the length fell by more than the reached rate rose.
/// The last condition rules out shortening by reaching the goal: episodes that newly reach it can
/// shorten the mean by at most their share (an episode cannot get shorter than zero), so a larger
/// drop needs episodes that ended early without reaching the goal.
fn crash_check(
    curves: &BTreeMap<CurveMetric, Curve>,
    final_window: usize,
    opts: &AnalysisOptions,
) -> Option<CrashFlag> {
    let len = &curves[&CurveMetric::EpisodeSteps];
    let col = &curves[&CurveMetric::Collision];
    let rea = &curves[&CurveMetric::Reached];
    if len.steps.len() < 3 || len.steps != col.steps || len.steps != rea.steps {
        return None;
    }
    let l: Vec<f64> = len.points.iter().map(|p| p.mean.point).collect();
    let c: Vec<f64> = col.points.iter().map(|p| p.mean.point).collect();
    let r: Vec<f64> = rea.points.iter().map(|p| p.mean.point).collect();
    let window = final_window.clamp(1, l.len() - 1);
    let peak = (0..l.len() - window)
        .filter(|&k| l[k].is_finite() && c[k].is_finite())
        .max_by(|&a, &b| l[a].total_cmp(&l[b]))?;
    let tail = l.len() - window..l.len();
    let l_end = mean(&finite(l[tail.clone()].iter().copied()));
    let c_end = mean(&finite(c[tail.clone()].iter().copied()));
    let r_end = mean(&finite(r[tail].iter().copied()));
    if l[peak].is_nan() || l[peak] <= 0.0 || !l_end.is_finite() || !c_end.is_finite() {
        return None;
    }
    let length_drop = (l[peak] - l_end) / l[peak];
    let collision_rise = c_end - c[peak];
    let reached_rise = r_end - r[peak];
    (length_drop >= opts.crash_length_drop
        && collision_rise >= opts.crash_collision_rise
        && length_drop > reached_rise.max(0.0))
    .then_some(CrashFlag {
        from_step: len.steps[peak],
        collision_rise,
        length_drop,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn curve(values: &[f64]) -> Curve {
        let e = |x: f64| Estimate {
            point: x,
            lo: x,
            hi: x,
        };
        Curve {
            steps: (0..values.len() as u64).map(|k| k * 100).collect(),
            points: values
                .iter()
                .map(|&x| PointStat {
                    n: 1,
                    mean: e(x),
                    iqm: e(x),
                })
                .collect(),
        }
    }

    fn curves(length: &[f64], collision: &[f64], reached: &[f64]) -> BTreeMap<CurveMetric, Curve> {
        [
            (CurveMetric::EpisodeSteps, curve(length)),
            (CurveMetric::Collision, curve(collision)),
            (CurveMetric::Reached, curve(reached)),
        ]
        .into_iter()
        .collect()
    }

    #[test]
    fn crash_check_flags_shorter_episodes_through_contact_not_through_reaching() {
        // The rule stated in the report (no published source; a reading of learning curves chosen
        // for termwise): length down >= 10%, collision rate up >= 0.1, and the length drop larger
        // than the rise of the reached rate (the most that newly reached goals can explain).
        let opts = AnalysisOptions::default();
        // Crashing: episodes 200 -> 120 steps, contact 0.1 -> 0.5, reached flat at 0.3.
        let crash = curves(
            &[200.0, 190.0, 150.0, 120.0, 120.0],
            &[0.1, 0.1, 0.3, 0.5, 0.5],
            &[0.3, 0.3, 0.3, 0.3, 0.3],
        );
        let f = crash_check(&crash, 2, &opts).expect("flagged");
        assert_eq!(f.from_step, 0);
        assert!((f.length_drop - 0.4).abs() < 1e-12);
        assert!((f.collision_rise - 0.4).abs() < 1e-12);
        // Learning to reach, touching obstacles on the way: shorter because the goal is reached.
        let reach = curves(
            &[200.0, 190.0, 150.0, 120.0, 120.0],
            &[0.1, 0.1, 0.3, 0.5, 0.5],
            &[0.1, 0.2, 0.5, 0.8, 0.8],
        );
        assert!(crash_check(&reach, 2, &opts).is_none());
        // Contact rises but episodes keep their length: not this pattern.
        let long = curves(
            &[200.0, 200.0, 200.0, 198.0, 199.0],
            &[0.1, 0.1, 0.3, 0.5, 0.5],
            &[0.3, 0.3, 0.3, 0.3, 0.3],
        );
        assert!(crash_check(&long, 2, &opts).is_none());
    }

    #[test]
    fn verdict_needs_the_whole_interval_on_one_side() {
        let e = |point, lo, hi| Estimate { point, lo, hi };
        let base = e(0.6, 0.42, 0.75);
        assert_eq!(
            verdict(&e(0.9, 0.8, 0.95), &base, true),
            Some(Verdict::Better)
        );
        assert_eq!(
            verdict(&e(0.9, 0.7, 0.95), &base, true),
            Some(Verdict::Unclear)
        );
        assert_eq!(
            verdict(&e(0.2, 0.1, 0.3), &base, true),
            Some(Verdict::Worse)
        );
        // Lower is better (collision rate): the same interval is now worse.
        assert_eq!(
            verdict(&e(0.9, 0.8, 0.95), &base, false),
            Some(Verdict::Worse)
        );
        // A baseline figure without an interval is compared as a point.
        assert_eq!(
            verdict(&e(2.0, 1.8, 2.2), &e(2.5, f64::NAN, f64::NAN), false),
            Some(Verdict::Better)
        );
    }
}
