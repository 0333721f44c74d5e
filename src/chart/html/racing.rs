//! The report's racing section: how much of the un-raced budget the study spent, where each variant stopped
//! and the interval that stopped it, or how many seeds it finished with.

use super::esc;
use crate::analysis::{StudySummary, VariantSummary};
use crate::chart::style::fmt_steps;
use crate::results::{Interval, RungEntry};
use std::fmt::Write;

fn interval(i: &Option<Interval>, signed: bool) -> String {
    match i {
        Some(i) if signed => format!(
            "{:+.2} <span class=ci>[{:+.2}, {:+.2}]</span>",
            i.point, i.lo, i.hi
        ),
        Some(i) => format!(
            "{:.2} <span class=ci>[{:.2}, {:.2}]</span>",
            i.point, i.lo, i.hi
        ),
        None => "<span class=na>—</span>".into(),
    }
}

/// Why a rung stopped a variant, in words: its interval against the leader that lies on the worse side.
fn why(e: &RungEntry, level: f64) -> String {
    let mut reasons = Vec::new();
    if let Some(d) = e.success_diff.filter(|d| d.hi < 0.0) {
        reasons.push(format!(
            "its final clean success is lower than <b>{}</b>'s by {}",
            esc(&e.leader),
            interval(&Some(d), true)
        ));
    }
    if let Some(r) = e.steps_ratio.filter(|r| r.lo > 1.0) {
        reasons.push(format!(
            "it needs {} times <b>{}</b>'s steps to the threshold",
            interval(&Some(r), false),
            esc(&e.leader)
        ));
    }
    format!(
        "{} (interval at {:.1}% lies entirely on the worse side)",
        reasons.join(" and "),
        level * 100.0
    )
}

/// Write the racing section.
pub fn racing_section(h: &mut String, s: &StudySummary, swatch: fn(&VariantSummary) -> String) {
    let (Some(r), Some(plan)) = (&s.racing, &s.study.racing) else {
        return;
    };
    h.push_str("<h2 id=racing>Racing</h2><div class=answer>");
    let spent = r.planned_steps as f64 / r.unraced_steps.max(1) as f64;
    let _ = write!(
        h,
        "<p>Racing with rungs at {} of each variant's {} seeds ({} seeds per variant), the report's rank-group intervals against the leader at {:.0}% before their Bonferroni adjustment, and freed seeds given back up to {} per variant. ",
        plan.rungs.iter().map(|f| f.to_string()).collect::<Vec<_>>().join(", "),
        s.study.seeds.len(),
        plan.rung_seeds.iter().map(|n| n.to_string()).collect::<Vec<_>>().join(", "),
        plan.confidence * 100.0,
        plan.max_seeds
    );
    let part = |x: u64| {
        format!(
            "{} ({:.1}%)",
            fmt_steps(x as f64),
            100.0 * x as f64 / r.unraced_steps.max(1) as f64
        )
    };
    let _ = write!(
        h,
        "{} of {} rungs decided. The study plans {} environment steps against {} without racing ({:.1}%): {} freed by stopped variants, {} of them given to the variants still racing as further seeds, {} saved.</p>",
        r.rungs.len(),
        plan.rungs.len(),
        fmt_steps(r.planned_steps as f64),
        fmt_steps(r.unraced_steps as f64),
        spent * 100.0,
        part(r.freed_steps),
        part(r.reinvested_steps),
        part(r.unraced_steps.saturating_sub(r.planned_steps))
    );
    h.push_str("<table id=racing-table><tr><th>variant</th><th>where it stopped</th><th>seeds</th><th>why</th></tr>");
    for rv in &r.variants {
        let Some(v) = s.variants.iter().find(|v| v.info.name == rv.name) else {
            continue;
        };
        let (stop, reason) = match rv.stopped_at {
            Some(k) => {
                let rung = r.rungs.iter().find(|x| x.rung == k);
                let entry = rung.and_then(|x| x.entries.iter().find(|e| e.variant == rv.name));
                (
                    format!(
                        "rung {k} <span class=ci>{:.0}% of its budget</span>",
                        rung.map_or(f64::NAN, |x| x.fraction * 100.0)
                    ),
                    match (rung, entry) {
                        (Some(x), Some(e)) => why(e, x.level),
                        _ => String::new(),
                    },
                )
            }
            None if r.rungs.len() == plan.rungs.len() => (
                "<span class=tag>raced to the end</span>".into(),
                "not behind the leader at any rung".into(),
            ),
            None => (
                "<span class=tag>still racing</span>".into(),
                "not behind the leader at any rung so far".into(),
            ),
        };
        let extra = rv.seeds.saturating_sub(s.study.seeds.len() as u64);
        let seeds = if extra > 0 {
            format!(
                "{} <span class=ci>(+{extra} from freed budget)</span>",
                rv.seeds
            )
        } else {
            rv.seeds.to_string()
        };
        let _ = write!(
            h,
            "<tr><td>{}</td><td>{stop}</td><td class=num>{seeds}</td><td>{reason}</td></tr>",
            swatch(v)
        );
    }
    h.push_str("</table>");
    for rung in &r.rungs {
        let _ = write!(
            h,
            "<details><summary>Rung {} ({} seeds per variant, intervals at {:.1}%)</summary><table><tr><th>rank</th><th>variant</th><th>steps to threshold<br><span class=ci>IQM</span></th><th>final clean success<br><span class=ci>IQM</span></th><th>steps vs the leader<br><span class=ci>ratio [CI]</span></th><th>clean success vs the leader<br><span class=ci>difference [CI]</span></th><th>decision</th></tr>",
            rung.rung,
            rung.seeds,
            rung.level * 100.0
        );
        for (k, e) in rung.entries.iter().enumerate() {
            let _ = write!(
                h,
                "<tr><td>{}</td><td>{}</td><td class=num>{}</td><td class=num>{}</td><td class=num>{}</td><td class=num>{}</td><td>{}</td></tr>",
                k + 1,
                esc(&e.variant),
                e.steps_iqm.map_or("—".into(), |x| format!("{x:.0}")),
                e.success_iqm.map_or("—".into(), |x| format!("{x:.2}")),
                interval(&e.steps_ratio, false),
                interval(&e.success_diff, true),
                if e.kept { "goes on" } else { "<b>stops</b>" }
            );
        }
        h.push_str("</table></details>");
    }
    h.push_str("<p class=ci>Racing spends each variant's budget seed by seed (successive halving over seeds: Jamieson &amp; Talwalkar, AISTATS 2016; Li et al., “Hyperband”, JMLR 18, 2017). At a rung the variants are ranked as in the report's ranking, on their finished seeds, and each is compared with the leader by the intervals of the report's rank groups (steps ratio and clean-success difference); a variant stops when one of them lies entirely on the worse side. Every run is a whole run, identical to the same seed of the un-raced study. Figures elsewhere in this report use every seed each variant ran, so stopped variants rest on fewer seeds.</p></div>");
}
