//! The sentences of the report: the plan in words, the headline answer with its intervals, and the yardstick
//! against the classical controller.

use super::*;

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
            est_num(&l.final_success.iqm)
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
            est_num(&l.final_success.iqm)
        )
    } else {
        format!(
            "{} reach {thr:.0}% clean success fastest and cannot be told apart with {seeds_text} seed{}: {} needs {} environment steps (IQM across seeds), final clean success {}.",
            join_names(&names),
            plural(seeds),
            names[0],
            steps_cell(l),
            est_num(&l.final_success.iqm)
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

/// A figure compared against the controller: name, accessor, whether higher is better.
pub(super) type Figure = (&'static str, fn(&VariantSummary) -> Estimate, bool);

/// One sentence per baseline: its figures with episode-level intervals and which learned variants
/// beat it on which figure.
pub fn yardstick_text(s: &StudySummary) -> Vec<String> {
    let figures: [Figure; 4] = [
        ("clean success", |v| v.final_success.iqm, true),
        ("collision rate", |v| v.final_collision.iqm, false),
        ("time to goal", |v| v.time_to_goal.iqm, false),
        ("RMS joint acceleration", |v| v.rms_joint_acc.iqm, false),
    ];
    let mut out = Vec::new();
    for b in s.baselines() {
        let base = &s.variants[b];
        let mut t = format!("<b>{}</b> (yardstick, not ranked)", esc(&base.info.name));
        match &base.episode_level {
            Some(e) => {
                let _ = write!(
                    t,
                    ": clean success {}, reached {}, collision rate {} over its {} evaluation episodes (Wilson intervals: the controller is deterministic, so its spread comes from the episodes, not from seeds).",
                    est_num(&e.success),
                    est_num(&e.reached),
                    est_num(&e.collision),
                    e.episodes
                );
            }
            None => {
                let _ = write!(t, ": clean success {}.", est_num(&base.final_success.iqm));
            }
        }
        let mut parts = Vec::new();
        for (name, f, higher) in figures {
            let (mut better, mut worse) = (Vec::new(), Vec::new());
            for i in s.ranking() {
                let v = &s.variants[i];
                match verdict(&f(v), &f(base), higher) {
                    Some(Verdict::Better) => better.push(esc(&v.info.name)),
                    Some(Verdict::Worse) => worse.push(esc(&v.info.name)),
                    _ => {}
                }
            }
            let mut p = format!("{name}: ");
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
