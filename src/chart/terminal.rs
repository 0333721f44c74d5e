//! The short plain-text ranking printed at the end of `termwise run` and `termwise report`.

use super::style::fmt_steps;
use crate::analysis::metric::{with_final, MetricId};
use crate::analysis::{Estimate, StudySummary, VariantSummary};
use std::fmt::Write;

fn est(e: &Estimate) -> String {
    if !e.point.is_finite() {
        "n/a".into()
    } else if e.lo.is_finite() {
        format!("{:.2} [{:.2}, {:.2}]", e.point, e.lo, e.hi)
    } else {
        format!("{:.2}", e.point)
    }
}

fn steps(v: &VariantSummary) -> String {
    let t = &v.steps_to_threshold;
    if !t.iqm.point.is_finite() {
        return "n/a".into();
    }
    format!(
        "{}{} [{}, {}]{}",
        if t.lower_bound { ">=" } else { "" },
        fmt_steps(t.iqm.point),
        fmt_steps(t.iqm.lo),
        fmt_steps(t.iqm.hi),
        if t.censored > 0 {
            format!(" {}/{} cens.", t.censored, t.reached + t.censored)
        } else {
            String::new()
        }
    )
}

/// The report's HTML sentence as plain text (tags dropped, the few entities it uses decoded).
pub fn plain(html: &str) -> String {
    let mut out = String::with_capacity(html.len());
    let mut in_tag = false;
    for c in html.chars() {
        match c {
            '<' => in_tag = true,
            '>' => in_tag = false,
            _ if !in_tag => out.push(c),
            _ => {}
        }
    }
    out.replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&quot;", "\"")
        .replace("&amp;", "&")
}

/// A few lines: run status, the rank groups with intervals, the controller as a yardstick, the
/// headline and any reward-gaming flags. Success means clean success (goal reached, no contact).
pub fn terminal_summary(s: &StudySummary) -> String {
    let st = &s.status;
    let mut out = String::new();
    let _ = writeln!(
        out,
        "study '{}' ({}): {} of {} runs done, {} diverged, {} interrupted, {} running, {} missing",
        s.study.name,
        plain(&super::html::plan_phrase(s)),
        st.done,
        st.total(),
        st.diverged,
        st.interrupted,
        st.running,
        st.missing
    );
    let width = s
        .variants
        .iter()
        .map(|v| v.info.name.chars().count())
        .max()
        .unwrap_or(7)
        .max(7);
    let steps_head = format!(
        "steps to {:.0}% clean success",
        s.study.success_threshold * 100.0
    );
    // The metrics shown in the ranking (`Metric::terminal`), in list order.
    let shown: Vec<(MetricId, &str)> = with_final()
        .filter_map(|(id, m, _)| m.terminal.map(|head| (id, head)))
        .collect();
    let cells = |v: &VariantSummary| -> String {
        shown
            .iter()
            .map(|&(id, _)| format!("{:<20}  ", est(&v.figure(id).iqm)))
            .collect()
    };
    let heads: String = shown.iter().map(|(_, h)| format!("{h:<20}  ")).collect();
    let _ = writeln!(
        out,
        "{:<9}  {:<width$}  {:<34}  {heads}steps vs {}",
        "group", "variant", steps_head, s.reference
    );
    for i in s.ranking() {
        let v = &s.variants[i];
        let group = match v.group {
            Some(0) => "1 (lead)".to_string(),
            Some(g) => (g + 1).to_string(),
            None => "-".to_string(),
        };
        let vs = match &v.vs_reference {
            Some(c) if c.effects.steps_ratio.point.is_finite() => {
                let r = &c.effects.steps_ratio;
                format!("{:.2}x [{:.2}, {:.2}]", r.point, r.lo, r.hi)
            }
            Some(_) => "n/a".into(),
            None => "reference".into(),
        };
        let mut notes = String::new();
        if v.gaming.is_some() {
            notes.push_str("  ! return up, clean success down");
        }
        if v.crashing.is_some() {
            notes.push_str("  ! episodes shortened by collisions");
        }
        let bad = v.status.diverged + v.status.interrupted;
        if bad > 0 {
            let _ = write!(notes, "  ({bad} diverged/interrupted)");
        }
        let _ = writeln!(
            out,
            "{:<9}  {:<width$}  {:<34}  {}{}{}",
            group,
            v.info.name,
            steps(v),
            cells(v),
            vs,
            notes
        );
    }
    for b in s.baselines() {
        let v = &s.variants[b];
        let _ = writeln!(
            out,
            "{:<9}  {:<width$}  {:<34}  {}(not ranked; intervals over {} evaluation episodes)",
            "yardstick",
            v.info.name,
            "no learning",
            cells(v),
            v.episode_level.as_ref().map_or(0, |e| e.episodes)
        );
    }
    let _ = writeln!(out, "{}", plain(&super::html::headline(s)));
    for t in super::html::yardstick_text(s) {
        let _ = writeln!(out, "{}", plain(&t));
    }
    out
}
