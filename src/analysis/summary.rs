//! The study summary: learning curves across seeds with confidence bands, per-variant aggregates of
//! the per-run figures, comparisons against the reference variant, run status, and the
//! reward-gaming check. Everything the charts and the report draw comes from here.

use super::bootstrap::{stratified_bootstrap, stream_seed, BootstrapSpec, Estimate};
use super::compare::{mann_whitney, probability_of_improvement, MannWhitney};
use super::load::{RunStatus, StudyInfo, StudyResults, VariantInfo, VariantKind, VariantRuns};
use super::run_metrics::{run_metrics, RunContext, RunMetrics, Threshold};
use super::stats::{finite, iqm, mean};
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
}

impl Default for AnalysisOptions {
    fn default() -> Self {
        Self {
            resamples: 2000,
            confidence: 0.95,
            seed: 0,
            gaming_success_drop: 0.1,
            gaming_return_rise: 0.05,
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
    /// Success rate, fraction.
    Success,
    /// Mean shaped return.
    Return,
    /// Time to goal, s.
    TimeToGoal,
    /// RMS joint acceleration, rad/s^2.
    RmsJointAcc,
    /// Curriculum difficulty, [0, 1].
    CurriculumLevel,
}

impl CurveMetric {
    /// All curve metrics.
    pub const ALL: [CurveMetric; 5] = [
        CurveMetric::Success,
        CurveMetric::Return,
        CurveMetric::TimeToGoal,
        CurveMetric::RmsJointAcc,
        CurveMetric::CurriculumLevel,
    ];

    /// Value of this metric in a progress row.
    pub fn of(self, r: &super::load::EvalRow) -> f64 {
        match self {
            CurveMetric::Success => r.success_rate,
            CurveMetric::Return => r.mean_return,
            CurveMetric::TimeToGoal => r.time_to_goal,
            CurveMetric::RmsJointAcc => r.rms_joint_acc,
            CurveMetric::CurriculumLevel => r.curriculum_level,
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
    /// progress.csv rows.
    pub rows: Vec<super::load::EvalRow>,
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

/// A variant against the reference variant.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Comparison {
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

/// Everything known about one variant.
#[derive(Debug, Clone, PartialEq)]
pub struct VariantSummary {
    /// Declaration from study.json.
    pub info: VariantInfo,
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
    /// Final success rate.
    pub final_success: Aggregate,
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
    /// Set when return rose while success fell.
    pub gaming: Option<GamingFlag>,
}

/// The whole study.
#[derive(Debug, Clone, PartialEq)]
pub struct StudySummary {
    /// study.json.
    pub study: StudyInfo,
    /// Name of the reference variant.
    pub reference: String,
    /// Options used.
    pub options: AnalysisOptions,
    /// Variants in declaration order.
    pub variants: Vec<VariantSummary>,
    /// Status counts over all runs.
    pub status: StatusCounts,
}

impl StudySummary {
    /// Indices of variants ranked best first: learned variants by steps-to-threshold IQM (fewer is
    /// better), ties and undefined values broken by final success IQM (higher is better);
    /// baselines last, by final success.
    pub fn ranking(&self) -> Vec<usize> {
        let mut idx: Vec<usize> = (0..self.variants.len()).collect();
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

/// Summarise a loaded study.
pub fn summarize(results: &StudyResults, opts: &AnalysisOptions) -> StudySummary {
    let study = &results.study;
    let reference = study
        .reference_variant
        .clone()
        .unwrap_or_else(|| study.variants[0].name.clone());
    let mut variants: Vec<VariantSummary> = results
        .variants
        .iter()
        .enumerate()
        .map(|(i, v)| summarize_variant(i, v, study, opts))
        .collect();
    let ref_runs = variants
        .iter()
        .find(|v| v.info.name == reference)
        .map(|v| v.runs.clone())
        .unwrap_or_default();
    for v in variants.iter_mut() {
        if v.info.name != reference {
            v.vs_reference = Some(compare(v.index, &v.runs, &ref_runs, opts));
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
    StudySummary {
        study: study.clone(),
        reference,
        options: *opts,
        variants,
        status,
    }
}

fn summarize_variant(
    index: usize,
    v: &VariantRuns,
    study: &StudyInfo,
    opts: &AnalysisOptions,
) -> VariantSummary {
    let ctx = RunContext {
        budget_steps: study.budget_steps,
        success_threshold: study.success_threshold,
        final_window: study.final_window,
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
    let gaming = gaming_check(&curves, study.final_window, opts);
    VariantSummary {
        steps_to_threshold: threshold_aggregate(index, &runs, opts),
        auc: agg(10, |m| m.auc),
        final_success: agg(11, |m| m.final_success),
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
    }
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
    Comparison {
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
