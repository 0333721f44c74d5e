//! The report's run status table: every planned run of every variant with its status, steps and evaluations.

use super::swatch;
use crate::analysis::{StudySummary, Threshold};
use crate::chart::style::fmt_steps;
use std::fmt::Write;

/// The run status table: one column per seed any variant ran (raced variants may have more or fewer).
pub(super) fn run_status(h: &mut String, s: &StudySummary) {
    h.push_str("<h2>Run status</h2><table><tr><th>variant</th>");
    let mut seeds: Vec<u64> = s.study.seeds.clone();
    for v in &s.variants {
        seeds.extend(v.runs.iter().map(|m| m.seed));
    }
    seeds.sort_unstable();
    seeds.dedup();
    for seed in &seeds {
        let _ = write!(h, "<th>seed {seed}</th>");
    }
    h.push_str("</tr>");
    for v in &s.variants {
        let _ = write!(h, "<tr><td>{}</td>", swatch(v));
        for seed in &seeds {
            match v.runs.iter().find(|m| m.seed == *seed) {
                Some(m) => {
                    let reach = match m.steps_to_threshold {
                        Threshold::Reached(x) => format!(
                            "<br><span class=ci>threshold at {}</span>",
                            fmt_steps(x as f64)
                        ),
                        Threshold::Censored(_) => {
                            "<br><span class=ci>threshold not reached</span>".into()
                        }
                        _ => String::new(),
                    };
                    let _ = write!(
                        h,
                        "<td class=\"st-{0}\">{0}<br><span class=ci>{1} steps, {2} evals</span>{3}</td>",
                        m.status.as_str(),
                        fmt_steps(m.last_step as f64),
                        m.evaluations,
                        reach
                    );
                }
                None => h.push_str("<td>—</td>"),
            }
        }
        h.push_str("</tr>");
    }
    h.push_str("</table>");
}
