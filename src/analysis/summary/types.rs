//! The summary's types: analysis settings, run-status counts, curves, aggregates, comparisons, flags,
//! verdicts and the per-variant and per-study summaries.

use super::*;

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
    pub(super) fn spec(&self) -> BootstrapSpec {
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

impl Aggregate {
    /// No run has the figure.
    pub const NONE: Aggregate = Aggregate {
        n: 0,
        iqm: Estimate::NONE,
        mean: Estimate::NONE,
    };
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
/// deterministic, so seeds add nothing): Wilson score intervals of each proportion (the metrics with
/// a final figure formed as `OverEpisodes::Proportion`).
#[derive(Debug, Clone, PartialEq)]
pub struct EpisodeLevel {
    /// Evaluation episodes behind each proportion.
    pub episodes: u64,
    /// Each proportion with its Wilson interval, in the order of `METRICS`.
    pub rates: Vec<(MetricId, Estimate)>,
}

impl EpisodeLevel {
    /// The proportion `m` with its Wilson interval (None when `m` is not a proportion).
    pub fn rate(&self, m: MetricId) -> Option<Estimate> {
        self.rates.iter().find(|(id, _)| *id == m).map(|(_, e)| *e)
    }
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
    /// Learning curves of the metrics with one (`Metric::curve`).
    pub curves: BTreeMap<MetricId, Curve>,
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
    /// Final figure of each metric, in the order of `METRICS` (None for metrics without one). For a
    /// baseline the proportions carry episode-level (Wilson) intervals, see `episode_level`.
    pub finals: Vec<Option<Aggregate>>,
    /// Baselines: proportions with intervals over evaluation episodes.
    pub episode_level: Option<EpisodeLevel>,
    /// Against the reference (None for the reference itself).
    pub vs_reference: Option<Comparison>,
    /// Set when return rose while clean success fell.
    pub gaming: Option<GamingFlag>,
    /// Set when episodes got shorter while the collision rate rose.
    pub crashing: Option<CrashFlag>,
    /// Rank group (0 = tied with the leader); None for baselines and unranked variants.
    pub group: Option<usize>,
    /// What PPO did per iteration, across seeds (None for the baseline and runs without training.csv).
    pub training: Option<crate::analysis::training::TrainingHealth>,
}

impl VariantSummary {
    /// The final figure of metric `m` across the variant's runs (`Aggregate::NONE` for a metric without one).
    pub fn figure(&self, m: MetricId) -> Aggregate {
        self.finals
            .get(m.0)
            .copied()
            .flatten()
            .unwrap_or(Aggregate::NONE)
    }
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
    /// The probe conditions' figures (None without probes).
    pub probes: Option<crate::analysis::probes::ProbeSummary>,
    /// racing.json of a raced study.
    pub racing: Option<crate::results::RacingRecord>,
}

impl StudySummary {
    /// Indices of the learned variants ranked best first: by steps-to-threshold IQM (fewer is
    /// better), ties and undefined values broken by final clean success IQM (higher is better).
    /// Baselines are yardsticks, not competitors: they are not ranked (see [`Self::baselines`]).
    pub fn ranking(&self) -> Vec<usize> {
        let keys: Vec<(usize, f64, f64)> = (0..self.variants.len())
            .filter(|&i| self.variants[i].info.kind == VariantKind::Learned)
            .map(|i| {
                let v = &self.variants[i];
                (
                    i,
                    v.steps_to_threshold.iqm.point,
                    v.figure(SUCCESS).iqm.point,
                )
            })
            .collect();
        crate::analysis::groups::rank_order(&keys)
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
