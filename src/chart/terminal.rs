//! The short plain-text ranking printed at the end of `termwise run` and `termwise report`.

use super::style::fmt_steps;
use crate::analysis::{StudySummary, VariantKind};
use std::fmt::Write;

/// A few lines: run status, the ranking with intervals, and any reward-gaming flags.
pub fn terminal_summary(s: &StudySummary) -> String {
    let st = &s.status;
    let mut out = String::new();
    let _ = writeln!(
        out,
        "study '{}': {} of {} runs done, {} diverged, {} interrupted, {} running, {} missing",
        s.study.name,
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
    let _ = writeln!(
        out,
        "{:>4}  {:<width$}  {:<32}  final success (IQM, CI)",
        "rank",
        "variant",
        format!(
            "steps to {:.0}% success (IQM, CI)",
            s.study.success_threshold * 100.0
        ),
    );
    for (r, &i) in s.ranking().iter().enumerate() {
        let v = &s.variants[i];
        let steps = if v.info.kind == VariantKind::Baseline {
            "baseline".to_string()
        } else {
            let t = &v.steps_to_threshold;
            if t.iqm.point.is_finite() {
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
            } else {
                "n/a".to_string()
            }
        };
        let f = &v.final_success.iqm;
        let success = if f.point.is_finite() {
            format!("{:.2} [{:.2}, {:.2}]", f.point, f.lo, f.hi)
        } else {
            "n/a".into()
        };
        let mut notes = String::new();
        if v.gaming.is_some() {
            notes.push_str("  ! return up, success down");
        }
        let bad = v.status.diverged + v.status.interrupted;
        if bad > 0 {
            let _ = write!(notes, "  ({bad} diverged/interrupted)");
        }
        let _ = writeln!(
            out,
            "{:>4}  {:<width$}  {:<32}  {}{}",
            r + 1,
            v.info.name,
            steps,
            success,
            notes
        );
    }
    out
}
