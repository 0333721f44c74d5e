//! The study summary: learning curves across seeds with confidence bands, per-variant aggregates of
//! the per-run figures, comparisons against the reference variant, run status, and the
//! reward-gaming check. Everything the charts and the report draw comes from here.

use super::bootstrap::{
    bootstrap_distribution, stratified_bootstrap, stream_seed, BootstrapSpec, Estimate,
};
use super::compare::{mann_whitney, normal_quantile, probability_of_improvement, MannWhitney};
use super::groups::{iqm_ratio, rank_groups, Ranked};
use super::load::{StudyResults, VariantRuns};
use super::metric::{with_curve, with_final, MetricId, OverEpisodes, COLLISION, SUCCESS};
use super::run_metrics::{run_metrics, RunContext, RunMetrics, Threshold};
use super::stats::{finite, iqm, mean, sample_std, wilson_interval};
use crate::results::{EvalRow, RunStatus, StudyRecord, VariantKind, VariantRecord};
use std::collections::BTreeMap;

mod checks;
#[cfg(test)]
mod tests;
mod types;
use checks::*;
pub use types::*;

/// Label of the AUC's bootstrap streams (the final figures' labels are `metric::Final::stream`).
const TAG_AUC: u64 = 10;
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
        probes: super::probes::summarize_probes(results, opts.spec(), opts.seed),
        racing: results.racing.clone(),
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
    finite(runs.iter().filter_map(|m| m.figure(SUCCESS)))
}

/// Rank groups (the rule is `groups::rank_groups`): walk the ranking best first; each variant joins the
/// group of the leader above it unless the data separate them. The first split is recorded as the gap.
fn assign_groups(s: &mut StudySummary) {
    let order: Vec<usize> = s
        .ranking()
        .into_iter()
        .filter(|&i| s.variants[i].steps_to_threshold.iqm.point.is_finite())
        .collect();
    let data: Vec<(Vec<f64>, Vec<f64>)> = order
        .iter()
        .map(|&i| {
            (
                steps_of(&s.variants[i].runs),
                success_of(&s.variants[i].runs),
            )
        })
        .collect();
    let ranked: Vec<Ranked> = order
        .iter()
        .zip(&data)
        .map(|(&index, (steps, success))| Ranked {
            index,
            steps,
            success,
        })
        .collect();
    let g = rank_groups(
        &ranked,
        s.options.confidence,
        s.options.resamples,
        s.options.seed,
    );
    s.group_confidence = g.level;
    s.gap = g
        .placed
        .iter()
        .find(|p| p.group == 1)
        .map(|p| (p.leader, p.index, p.steps_ratio));
    for p in &g.placed {
        s.variants[p.index].group = Some(p.group);
    }
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
    let curves = with_curve()
        .map(|(id, _, spec)| (id, curve(index, spec.stream, v, id, opts)))
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
    let gaming = gaming_check(&curves, study.final_window as usize, opts);
    let crashing = crash_check(&curves, study.final_window as usize, opts);
    let mut finals: Vec<Option<Aggregate>> = vec![None; super::metric::METRICS.len()];
    for (id, _, f) in with_final() {
        let values = finite(runs.iter().filter_map(|m| m.figure(id)));
        finals[id.0] = Some(aggregate(index, f.stream, &values, opts));
    }
    let episode_level = if v.info.kind == VariantKind::Baseline && study.eval_episodes > 0 {
        episode_level(&runs, study.eval_episodes, opts.confidence)
    } else {
        None
    };
    if let Some(e) = &episode_level {
        for &(id, est) in &e.rates {
            if let Some(a) = finals[id.0].as_mut() {
                a.iqm = est;
                a.mean = est;
            }
        }
    }
    let auc = finite(runs.iter().filter_map(|m| m.auc));
    VariantSummary {
        training: super::training::training_health(v),
        steps_to_threshold: threshold_aggregate(index, &runs, opts),
        auc: aggregate(index, TAG_AUC, &auc, opts),
        finals,
        episode_level,
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
    let m = runs.iter().find(|m| m.figure(SUCCESS).is_some())?;
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
        rates: with_final()
            .filter(|(_, metric, _)| metric.episodes == OverEpisodes::Proportion)
            .map(|(id, _, _)| (id, est(m.figure(id))))
            .collect(),
    })
}

/// Across-seed mean and IQM with CIs at every evaluation step present in any run.
fn curve(
    index: usize,
    metric_tag: u64,
    v: &VariantRuns,
    metric: MetricId,
    opts: &AnalysisOptions,
) -> Curve {
    let value = metric.metric().value;
    let mut by_step: BTreeMap<u64, Vec<f64>> = BTreeMap::new();
    for r in &v.runs {
        for row in &r.progress {
            let entry = by_step.entry(row.env_steps).or_default();
            let x = value(row);
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

/// IQM and mean with bootstrap CIs of one figure's finite values over a variant's runs.
fn aggregate(index: usize, tag: u64, xs: &[f64], opts: &AnalysisOptions) -> Aggregate {
    let seed = |t| stream_seed(opts.seed, &[index as u64, tag, t]);
    Aggregate {
        n: xs.len(),
        iqm: stratified_bootstrap(&[xs], |s| iqm(&s[0]), opts.spec(), seed(TAG_AGG_IQM)),
        mean: stratified_bootstrap(&[xs], |s| mean(&s[0]), opts.spec(), seed(TAG_AGG_MEAN)),
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
    let success = |r: &[RunMetrics]| finite(r.iter().filter_map(|m| m.figure(SUCCESS)));
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
    let coll = |r: &[RunMetrics]| finite(r.iter().filter_map(|m| m.figure(COLLISION)));
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
