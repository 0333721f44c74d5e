//! The sentences of the report: the plan in words, the headline answer with its intervals, the yardstick
//! against the classical controller, and how the numbers were computed.

use super::*;
use crate::analysis::metric::{with_final, Better, Metric, MetricId, SUCCESS};

/// "3 learned variants × 5 seeds + the classical controller (1 deterministic run)", with the
/// singular where it applies.
pub fn plan_phrase(s: &StudySummary) -> String {
    let learned = s
        .variants
        .iter()
        .filter(|v| v.info.kind == VariantKind::Learned)
        .count();
    let baselines = s.variants.len() - learned;
    let mut out = format!(
        "{} learned variant{} × {} seed{}",
        learned,
        plural(learned),
        s.study.seeds.len(),
        plural(s.study.seeds.len())
    );
    if s.racing.is_some() {
        let _ = write!(out, " raced ({} seeds each, see Racing)", seeds_words(s).0);
    }
    if baselines > 0 {
        let _ = write!(
            out,
            " + {} classical controller{} (one deterministic run each)",
            baselines,
            plural(baselines)
        );
    }
    out
}

/// Seeds per learned variant in words: the study's seed count, or for a raced study whose variants ran
/// different numbers of seeds the range ("4 to 9"); with the count that decides the plural.
pub(super) fn seeds_words(s: &StudySummary) -> (String, usize) {
    let n = s.study.seeds.len();
    if s.racing.is_none() {
        return (n.to_string(), n);
    }
    let counts: Vec<usize> = s
        .variants
        .iter()
        .filter(|v| v.info.kind == VariantKind::Learned)
        .map(|v| v.runs.len())
        .collect();
    let (lo, hi) = (
        counts.iter().copied().min().unwrap_or(n),
        counts.iter().copied().max().unwrap_or(n),
    );
    if lo == hi {
        (lo.to_string(), lo)
    } else {
        (format!("{lo} to {hi}"), hi)
    }
}

pub(super) fn plural(n: usize) -> &'static str {
    if n == 1 {
        ""
    } else {
        "s"
    }
}

/// "A", "A and B", "A, B and C".
pub(super) fn join_names(names: &[String]) -> String {
    match names.len() {
        0 => String::new(),
        1 => names[0].clone(),
        n => format!("{} and {}", names[..n - 1].join(", "), names[n - 1]),
    }
}

pub(super) fn ratio_text(e: &Estimate) -> String {
    if !e.point.is_finite() {
        return "<span class=na>n/a</span>".into();
    }
    if e.lo.is_finite() {
        format!(
            "{:.2}× <span class=ci>[{:.2}, {:.2}]</span>",
            e.point, e.lo, e.hi
        )
    } else {
        format!("{:.2}×", e.point)
    }
}

pub(super) fn diff_text(e: &Estimate) -> String {
    if !e.point.is_finite() {
        return "<span class=na>n/a</span>".into();
    }
    if e.lo.is_finite() {
        format!(
            "{:+.2} <span class=ci>[{:+.2}, {:+.2}]</span>",
            e.point, e.lo, e.hi
        )
    } else {
        format!("{:+.2}", e.point)
    }
}

/// The headline: what the data show and what they do not.
pub fn headline(s: &StudySummary) -> String {
    let thr = s.study.success_threshold * 100.0;
    let top = s.group_members(0);
    let Some(&leader) = top.first() else {
        return "No learned run has finished or reached the threshold yet, so there is no ranking to report.".into();
    };
    let l = &s.variants[leader];
    let names: Vec<String> = top
        .iter()
        .map(|&i| format!("<b>{}</b>", esc(&s.variants[i].info.name)))
        .collect();
    let (seeds_text, seeds) = seeds_words(s);
    let nobody_reached = s
        .ranking()
        .iter()
        .all(|&i| s.variants[i].steps_to_threshold.reached == 0);
    if nobody_reached {
        let mut out = format!(
            "No learned variant reached {thr:.0}% clean success within the budget ({} environment steps per run) in any seed, so none can be ranked on speed. By final clean success, {} lead{} with {}",
            fmt_steps(s.study.budget_steps as f64),
            join_names(&names),
            if top.len() == 1 { "s" } else { "" },
            est_num(&l.figure(SUCCESS).iqm)
        );
        if top.len() > 1 {
            let _ = write!(
                out,
                " ({}); they cannot be told apart with {seeds_text} seed{}.",
                names[0],
                plural(seeds)
            );
        } else {
            out.push('.');
        }
        return out;
    }
    let mut out = if top.len() == 1 {
        format!(
            "{} reaches {thr:.0}% clean success fastest: {} environment steps (IQM across seeds), final clean success {}.",
            names[0],
            steps_cell(l),
            est_num(&l.figure(SUCCESS).iqm)
        )
    } else {
        format!(
            "{} reach {thr:.0}% clean success fastest and cannot be told apart with {seeds_text} seed{}: {} needs {} environment steps (IQM across seeds), final clean success {}.",
            join_names(&names),
            plural(seeds),
            names[0],
            steps_cell(l),
            est_num(&l.figure(SUCCESS).iqm)
        )
    };
    match s.gap {
        Some((_, b, r)) if r.point.is_finite() => {
            let _ = write!(
                out,
                " <b>{}</b>, the best of the rest, needs {} as many steps as {}.",
                esc(&s.variants[b].info.name),
                ratio_text(&r),
                names[0]
            );
        }
        Some((_, b, _)) => {
            let _ = write!(
                out,
                " <b>{}</b> and the rest are separated by final clean success, not by speed.",
                esc(&s.variants[b].info.name)
            );
        }
        None => {
            let ranked = s
                .ranking()
                .iter()
                .filter(|&&i| s.variants[i].group.is_some())
                .count();
            if ranked > 1 && top.len() == ranked {
                let _ = write!(
                    out,
                    " The data do not separate any of the {ranked} learned variants."
                );
            }
        }
    }
    if let Some(n) = s
        .seeds_needed
        .filter(|n| s.variants[n.second].group == s.variants[n.first].group)
    {
        let (a, b) = (
            &s.variants[n.first].info.name,
            &s.variants[n.second].info.name,
        );
        match n.seeds {
            Some(k) => {
                let _ = write!(
                    out,
                    " Telling {} from {} on steps to threshold would take about {} seeds per variant at the observed spread (an estimate; {} now).",
                    esc(a),
                    esc(b),
                    if k >= 1000 { "1000 or more".to_string() } else { k.to_string() },
                    n.seeds_now
                );
            }
            None => {
                let _ = write!(
                    out,
                    " {} and {} show no difference in steps to threshold, so no number of seeds can be estimated from these runs.",
                    esc(a),
                    esc(b)
                );
            }
        }
    }
    out
}

/// One sentence per baseline: its figures with episode-level intervals and which learned variants
/// beat it on which figure.
pub fn yardstick_text(s: &StudySummary) -> Vec<String> {
    // The metrics marked `yardstick`, in list order.
    let figures: Vec<(MetricId, &Metric)> = with_final()
        .filter(|(_, m, _)| m.yardstick)
        .map(|(id, m, _)| (id, m))
        .collect();
    let mut out = Vec::new();
    for b in s.baselines() {
        let base = &s.variants[b];
        let mut t = format!("<b>{}</b> (yardstick, not ranked)", esc(&base.info.name));
        match &base.episode_level {
            Some(e) => {
                let rates: Vec<String> = e
                    .rates
                    .iter()
                    .map(|(id, est)| format!("{} {}", id.metric().name, est_num(est)))
                    .collect();
                let _ = write!(
                    t,
                    ": {} over its {} evaluation episodes (Wilson intervals: the controller is deterministic, so its spread comes from the episodes, not from seeds).",
                    rates.join(", "),
                    e.episodes
                );
            }
            None => {
                let _ = write!(
                    t,
                    ": {} {}.",
                    SUCCESS.metric().name,
                    est_num(&base.figure(SUCCESS).iqm)
                );
            }
        }
        let mut parts = Vec::new();
        for &(id, metric) in &figures {
            let higher = metric.better == Better::Higher;
            let (mut better, mut worse) = (Vec::new(), Vec::new());
            for i in s.ranking() {
                let v = &s.variants[i];
                match verdict(&v.figure(id).iqm, &base.figure(id).iqm, higher) {
                    Some(Verdict::Better) => better.push(esc(&v.info.name)),
                    Some(Verdict::Worse) => worse.push(esc(&v.info.name)),
                    _ => {}
                }
            }
            let mut p = format!("{}: ", metric.name);
            if better.is_empty() {
                p.push_str("no learned variant beats it");
            } else {
                let _ = write!(
                    p,
                    "{} beat{} it",
                    join_names(&better),
                    if better.len() == 1 { "s" } else { "" }
                );
            }
            if !worse.is_empty() {
                let _ = write!(
                    p,
                    ", {} fall{} short",
                    join_names(&worse),
                    if worse.len() == 1 { "s" } else { "" }
                );
            }
            parts.push(p);
        }
        let _ = write!(
            t,
            " Against it — {}; the rest cannot be told apart from it.",
            parts.join("; ")
        );
        out.push(t);
    }
    out
}

/// How the numbers were computed: the report's closing list.
pub(super) fn methods(h: &mut String, s: &StudySummary) {
    let o = &s.options;
    let _ = write!(
        h,
        "<h2>How these numbers were computed</h2><ul>\
<li>IQM = interquartile mean, the mean of the middle 50% of runs (25% trimmed mean); intervals are {:.0}% percentile intervals of a stratified bootstrap that resamples seeds within each variant, {} resamples, seed {} (Agarwal et al., “Deep RL at the Edge of the Statistical Precipice”, NeurIPS 2021).</li>\
<li>Success means clean success: an evaluation episode succeeds when the effector reaches the goal region and no contact (obstacle, workspace boundary or the arm itself) happened in it. The reached rate counts episodes that reached the goal, contact allowed; the collision rate counts episodes with any contact.</li>\
<li>Steps to threshold: first evaluation with clean success rate ≥ {}. Runs that finished without reaching it are censored at the budget (shown as such, ranked worse than any run that reached it; “≥” marks an IQM that is only a lower bound). Unfinished runs that have not reached it yet are left out and counted.</li>\
<li>AUC: area under the clean-success curve from the first evaluation to the budget divided by its width (1 = always successful). Final figures: mean of the last {} evaluations.</li>\
<li>Diverged runs count as failures: success 0 after divergence and final success 0; interrupted or running runs are excluded from AUC and final figures. Every run is listed under Run status.</li>\
<li>Probability of improvement P(X &gt; Y) counts pairs of runs (ties count one half), with a stratified bootstrap interval. Mann-Whitney U p-values are two-sided: exact without ties for small samples, otherwise the normal approximation with tie and continuity corrections.</li>\
<li>The classical controller is deterministic, so seeds add nothing: its proportions carry {:.0}% Wilson score intervals over its evaluation episodes (Wilson, JASA 1927). A learned variant beats it on a figure when the variant's interval lies entirely on the better side of the controller's.</li>\
<li>Seeds needed: with d the observed log ratio of the top two variants' steps to threshold and sd its bootstrap standard deviation at n seeds, n' = n ((z<sub>1-α/2</sub> + z<sub>{:.2}</sub>) sd / |d|)² seeds per variant would show the difference with power {:.2}; an estimate that takes the observed difference and spread as true.</li>\
<li>Reward-gaming flags: (1) mean clean success fell by at least {} after its peak while mean return rose by at least {:.0}% of its range; (2) from the evaluation with the longest episodes, mean episode length fell by at least {:.0}% while the collision rate rose by at least {}, and the length fell by a larger fraction than the reached rate rose (newly reached goals can shorten the mean by at most their share), so episodes ended early without reaching the goal.</li></ul>",
        o.confidence * 100.0,
        o.resamples,
        o.seed,
        s.study.success_threshold,
        s.study.final_window,
        o.confidence * 100.0,
        o.power,
        o.power,
        o.gaming_success_drop,
        o.gaming_return_rise * 100.0,
        o.crash_length_drop * 100.0,
        o.crash_collision_rise
    );
}
