//! The report's probe section: the variants x probes table of clean success with the drop from the training
//! condition, which variant is most robust (by the report's rank-group rule) and what each probe changes.

use super::{esc, est_num};
use crate::analysis::probes::{ProbeCell, ProbeSummary};
use crate::analysis::{Estimate, StudySummary, VariantKind, VariantSummary};
use std::fmt::Write;

fn diff(e: &Estimate) -> String {
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

fn cell(c: &Option<ProbeCell>, training: bool) -> String {
    match c {
        None => "<td class=num><span class=na>no data</span></td>".into(),
        Some(c) if training => format!(
            "<td class=num>{}<br><span class=ci>{} run{}</span></td>",
            est_num(&c.success),
            c.runs,
            if c.runs == 1 { "" } else { "s" }
        ),
        Some(c) => format!(
            "<td class=num>{}<br><span class=ci>change</span> {}</td>",
            est_num(&c.success),
            diff(&c.drop)
        ),
    }
}

/// The robustness sentence.
fn robust_text(s: &StudySummary, p: &ProbeSummary) -> String {
    let name = |i: usize| format!("<b>{}</b>", esc(&s.variants[i].info.name));
    let Some(first) = p.robust.first() else {
        return "No learned variant has finished runs with every probe yet, so none can be called most robust.".into();
    };
    let level = p.level * 100.0;
    let mut t = format!(
        "Most robust: {} — mean clean success over the {} probes {} (IQM across its runs of each run's mean over the probes).",
        name(first.index),
        p.probes.len(),
        est_num(&first.score)
    );
    let tied: Vec<String> = p
        .robust
        .iter()
        .skip(1)
        .filter(|r| r.group == 0)
        .map(|r| name(r.index))
        .collect();
    if p.robust.len() == 1 {
        t.push_str(" It is the only learned variant with probe results.");
    } else if tied.is_empty() {
        let next = &p.robust[1];
        let _ = write!(
            t,
            " The data separate it from every other learned variant: the next, {}, is lower by {} (interval at {level:.1}%, the report's rank-group rule).",
            name(next.index),
            diff(&next.diff)
        );
    } else {
        let _ = write!(
            t,
            " It cannot be told apart from {} with these seeds (the report's rank-group rule: no interval of the difference, at {level:.1}%, lies entirely below 0), so the data name a group, not a single most robust variant.",
            tied.join(", ")
        );
    }
    t
}

/// Write the probe section.
pub fn probes_section(h: &mut String, s: &StudySummary, swatch: fn(&VariantSummary) -> String) {
    let Some(p) = &s.probes else { return };
    h.push_str("<h2 id=probes>Probe conditions</h2>");
    let _ = write!(h, "<div class=answer><p>{}</p></div>", robust_text(s, p));
    h.push_str("<div style=\"overflow-x:auto\"><table id=probe-table><tr><th>variant</th><th>training condition<br><span class=ci>clean success, last evaluation</span></th>");
    for pr in &p.probes {
        let _ = write!(h, "<th>{}</th>", esc(&pr.name));
    }
    h.push_str("</tr>");
    let mut rows: Vec<usize> = (0..s.variants.len())
        .filter(|&i| s.variants[i].info.kind == VariantKind::Learned)
        .collect();
    rows.extend(
        (0..s.variants.len()).filter(|&i| s.variants[i].info.kind == VariantKind::Baseline),
    );
    for vi in rows {
        let v = &s.variants[vi];
        let class = if v.info.kind == VariantKind::Baseline {
            " class=yardstick"
        } else {
            ""
        };
        let _ = write!(
            h,
            "<tr{class}><td>{}</td>{}",
            swatch(v),
            cell(&p.training[vi], true)
        );
        for c in &p.cells[vi] {
            h.push_str(&cell(c, false));
        }
        h.push_str("</tr>");
    }
    h.push_str("</table></div>");
    let conf = s.options.confidence * 100.0;
    let _ = write!(
        h,
        "<p class=ci>Each cell: clean success of the final policies on the probe's fixed evaluation episodes (the same episodes for every variant and seed), IQM across seeds with a {conf:.0}% stratified bootstrap interval; below it the change from the training condition — per run, probe success minus the same policy's last evaluation, then IQM with its interval. The controller's cells carry Wilson intervals over the probe's episodes. Diverged runs count as 0 everywhere. The robustness ranking orders learned variants by the IQM of each run's mean clean success over the probes and groups them with the report's rank-group rule.</p>"
    );
    if p.unprobed > 0 {
        let _ = write!(
            h,
            "<p class=warn>{} finished runs have no row for some probe yet; `termwise probe RESULTS_DIR EXPERIMENT.toml` evaluates them without retraining.</p>",
            p.unprobed
        );
    }
    h.push_str("<details><summary>What each probe changes</summary><ul>");
    for pr in &p.probes {
        let _ = write!(
            h,
            "<li><b>{}</b>: {}</li>",
            esc(&pr.name),
            pr.changes
                .iter()
                .map(|c| esc(c))
                .collect::<Vec<_>>()
                .join("; ")
        );
    }
    h.push_str("</ul></details>");
}
