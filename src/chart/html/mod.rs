//! report.html: a single self-contained page (inline CSS and SVG, no external assets) that opens
//! with the answer — the ranking with intervals — then the summary table, what each variant changed,
//! the charts, run status and how the numbers were computed.

use super::render::ChartFiles;
use super::style::fmt_steps;
use crate::analysis::metric::{with_final, MetricId};
use crate::analysis::{
    verdict, Estimate, RunStatus, StudySummary, VariantKind, VariantSummary, Verdict,
};
use std::fmt::Write;

mod probes;
mod racing;
mod status;
mod words;
pub use words::*;

/// Escape text for HTML.
pub fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

fn est_num(e: &Estimate) -> String {
    if !e.point.is_finite() {
        return "<span class=na>n/a</span>".into();
    }
    if e.lo.is_finite() {
        format!(
            "{:.2} <span class=ci>[{:.2}, {:.2}]</span>",
            e.point, e.lo, e.hi
        )
    } else {
        format!("{:.2}", e.point)
    }
}

fn est_g(e: &Estimate) -> String {
    let f = |x: f64| {
        if x.abs() >= 100.0 {
            format!("{x:.0}")
        } else if x.abs() >= 1.0 {
            format!("{x:.2}")
        } else {
            format!("{x:.3}")
        }
    };
    if !e.point.is_finite() {
        return "<span class=na>n/a</span>".into();
    }
    if e.lo.is_finite() {
        format!(
            "{} <span class=ci>[{}, {}]</span>",
            f(e.point),
            f(e.lo),
            f(e.hi)
        )
    } else {
        f(e.point)
    }
}

fn steps_cell(v: &VariantSummary) -> String {
    if v.info.kind == VariantKind::Baseline {
        return "<span class=na>baseline (no learning)</span>".into();
    }
    let t = &v.steps_to_threshold;
    if !t.iqm.point.is_finite() {
        return "<span class=na>no finished runs</span>".into();
    }
    let lb = if t.lower_bound { "≥ " } else { "" };
    let mut s = format!(
        "{lb}{} <span class=ci>[{}, {}]</span>",
        fmt_steps(t.iqm.point),
        fmt_steps(t.iqm.lo),
        fmt_steps(t.iqm.hi)
    );
    if t.censored > 0 {
        let _ = write!(
            s,
            " <span class=tag>{} of {} censored</span>",
            t.censored,
            t.reached + t.censored
        );
    }
    if t.pending > 0 {
        let _ = write!(s, " <span class=tag>{} unfinished</span>", t.pending);
    }
    s
}

fn p_cell(p: Option<crate::analysis::MannWhitney>) -> String {
    match p {
        Some(m) => format!("{:.3}", m.p_value),
        None => "<span class=na>n/a</span>".into(),
    }
}

fn swatch(v: &VariantSummary) -> String {
    let c = super::style::variant_colour(v.index);
    format!(
        "<span class=sw style=\"background:rgb({},{},{})\"></span>{}",
        c.0,
        c.1,
        c.2,
        esc(&v.info.name)
    )
}

const CSS: &str = "
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;color:#26262e;margin:0;background:#fbfaf7;line-height:1.45}
main{max-width:1440px;margin:0 auto;padding:24px 32px 64px}
h1{font-size:28px;margin:8px 0 4px}h2{font-size:21px;margin:36px 0 10px;border-bottom:2px solid #d9d6cc;padding-bottom:4px}
.lede{color:#5c5c68;margin:0 0 16px}
.answer{background:#fff;border-left:6px solid #183c78;padding:14px 20px;margin:12px 0;box-shadow:0 1px 3px rgba(0,0,0,.08)}
.warn{background:#fff4ef;border-left:6px solid #b03428;padding:10px 18px;margin:10px 0}
table{border-collapse:collapse;background:#fff;font-size:14px;margin:8px 0}
th,td{padding:6px 10px;border-bottom:1px solid #e6e4dc;text-align:left;vertical-align:top}
th{background:#f1efe7;font-weight:600}
td.num{font-variant-numeric:tabular-nums;white-space:nowrap}
.ci{color:#6e6e7a;font-size:12px}.na{color:#9a9aa5}.tag{background:#efe9da;border-radius:3px;padding:0 5px;font-size:12px;white-space:nowrap}
.flag{color:#b03428;font-weight:600}
tr.yardstick td{background:#f6f4ee;border-top:2px solid #d9d6cc}
#headline{font-size:17px}
td:has(.sw){white-space:nowrap}
.sw{display:inline-block;width:12px;height:12px;border-radius:2px;margin-right:6px;vertical-align:-1px;border:1px solid rgba(0,0,0,.25)}
figure{margin:18px 0 30px;background:#fff;padding:10px;box-shadow:0 1px 3px rgba(0,0,0,.08)}
figure svg{max-width:100%;height:auto;display:block}
figcaption{color:#4c4c58;font-size:14px;margin-top:6px}
.st-done{color:#2b6a3a}.st-diverged{color:#b03428;font-weight:600}.st-interrupted{color:#a35d00;font-weight:600}.st-running{color:#375a9e}.st-missing{color:#777}
code,pre{font-family:ui-monospace,Menlo,Consolas,monospace;font-size:13px}
pre{background:#fff;padding:10px;overflow:auto;border:1px solid #e6e4dc}
";

/// Build the page.
pub fn report_html(s: &StudySummary, charts: &[ChartFiles]) -> String {
    let mut h = String::with_capacity(1 << 20);
    let st = &s.status;
    let _ = write!(
        h,
        "<!DOCTYPE html><html lang=en><head><meta charset=utf-8><meta name=viewport content=\"width=device-width,initial-scale=1\"><title>termwise — {}</title><style>{CSS}</style></head><body><main>",
        esc(&s.study.name)
    );
    let _ = write!(
        h,
        "<h1>Study “{}”</h1><p class=lede>{}; budget {} environment steps per run; clean-success threshold {}; reference variant <b>{}</b>. Runs: {} done, {} diverged, {} interrupted, {} running, {} missing (of {}). <b>Success means clean success</b> throughout: the goal region reached with no contact in the episode; episodes that reached the goal after touching something count in the reached rate, and every episode with contact in the collision rate.</p>",
        esc(&s.study.name),
        plan_phrase(s),
        fmt_steps(s.study.budget_steps as f64),
        s.study.success_threshold,
        esc(&s.reference),
        st.done,
        st.diverged,
        st.interrupted,
        st.running,
        st.missing,
        st.total()
    );
    if st.done < st.total() {
        let _ = write!(
            h,
            "<div class=warn>This study is not complete: {} of {} runs finished at the budget. Figures use whatever the runs have written so far; unfinished runs are excluded from final and AUC figures and counted below.</div>",
            st.done,
            st.total()
        );
    }
    answer(&mut h, s);
    racing::racing_section(&mut h, s, swatch);
    summary_table(&mut h, s);
    probes::probes_section(&mut h, s, swatch);
    changes(&mut h, s);
    h.push_str("<h2>Charts</h2>");
    for c in charts {
        let _ = write!(
            h,
            "<figure id=\"chart-{}\">{}<figcaption>{}</figcaption></figure>",
            c.stem,
            strip_xml_decl(&c.svg_text),
            esc(&c.caption)
        );
    }
    super::training::html_panel(&mut h, s, swatch);
    status::run_status(&mut h, s);
    methods(&mut h, s);
    h.push_str("</main></body></html>\n");
    h
}

fn strip_xml_decl(svg: &str) -> &str {
    match svg.find("<svg") {
        Some(i) => &svg[i..],
        None => svg,
    }
}

fn answer(h: &mut String, s: &StudySummary) {
    h.push_str("<h2>The answer</h2><div class=answer>");
    let _ = write!(h, "<p id=headline>{}</p>", headline(s));
    let conf = s.options.confidence * 100.0;
    let _ = write!(
        h,
        "<div style=\"overflow-x:auto\"><table id=ranking><tr><th>group</th><th>variant</th><th>steps to {:.0}% clean success<br><span class=ci>IQM [{conf:.0}% CI]</span></th>",
        s.study.success_threshold * 100.0,
    );
    // The metrics shown in the ranking, in list order.
    let shown: Vec<MetricId> = with_final()
        .filter(|(_, m, _)| m.ranking.is_some())
        .map(|(id, _, _)| id)
        .collect();
    for (head, note) in with_final().filter_map(|(_, m, _)| m.ranking) {
        let _ = write!(
            h,
            "<th>{}<br><span class=ci>{}</span></th>",
            esc(head),
            esc(note)
        );
    }
    let _ = write!(
        h,
        "<th>steps vs {ref}<br><span class=ci>ratio [CI], &lt;1 faster</span></th><th>clean success vs {ref}<br><span class=ci>difference [CI]</span></th><th>AUC vs {ref}<br><span class=ci>difference [CI]</span></th><th>notes</th></tr>",
        ref = esc(&s.reference)
    );
    let cells = |v: &VariantSummary| -> String {
        shown
            .iter()
            .map(|&id| format!("<td class=num>{}</td>", est_num(&v.figure(id).iqm)))
            .collect()
    };
    let rank = s.ranking();
    for &i in &rank {
        let v = &s.variants[i];
        let group = match v.group {
            Some(0) => "1 <span class=tag>tied with the leader</span>".to_string(),
            Some(g) => format!("{}", g + 1),
            None => "<span class=na>not ranked</span>".into(),
        };
        let (r, d, a) = match &v.vs_reference {
            Some(c) => (
                ratio_text(&c.effects.steps_ratio),
                diff_text(&c.effects.success_diff),
                diff_text(&c.effects.auc_diff),
            ),
            None => (
                "<span class=na>reference</span>".into(),
                "<span class=na>reference</span>".into(),
                "<span class=na>reference</span>".into(),
            ),
        };
        let _ = write!(
            h,
            "<tr><td>{group}</td><td>{}</td><td class=num>{}</td>{}<td class=num>{r}</td><td class=num>{d}</td><td class=num>{a}</td><td>{}</td></tr>",
            swatch(v),
            steps_cell(v),
            cells(v),
            notes(v)
        );
    }
    for b in s.baselines() {
        let v = &s.variants[b];
        let _ = write!(
            h,
            "<tr class=yardstick><td><span class=tag>yardstick</span></td><td>{}</td><td class=num><span class=na>no learning</span></td>{}<td class=num><span class=na>—</span></td><td class=num><span class=na>—</span></td><td class=num><span class=na>—</span></td><td>{}</td></tr>",
            swatch(v),
            cells(v),
            if v.episode_level.is_some() {
                "<span class=ci>Wilson, over episodes</span>".to_string()
            } else {
                notes(v)
            }
        );
    }
    h.push_str("</table></div>");
    for t in yardstick_text(s) {
        let _ = write!(h, "<p>{t}</p>");
    }
    let flagged: Vec<String> = s
        .variants
        .iter()
        .filter_map(|v| {
            v.gaming.map(|g| {
                format!(
                    "<b>{}</b> (clean success peaked at {} steps and then fell by {:.2} while the return kept rising)",
                    esc(&v.info.name),
                    fmt_steps(g.peak_step as f64),
                    g.success_drop
                )
            })
        })
        .chain(s.variants.iter().filter_map(|v| {
            v.crashing.map(|c| {
                format!(
                    "<b>{}</b> (from {} steps its episodes got {:.0}% shorter while its collision rate rose by {:.2}: it may be ending episodes by crashing)",
                    esc(&v.info.name),
                    fmt_steps(c.from_step as f64),
                    c.length_drop * 100.0,
                    c.collision_rise
                )
            })
        }))
        .collect();
    if !flagged.is_empty() {
        let _ = write!(
            h,
            "<p class=flag>Reward may be gamed: {}. Check its reward terms before trusting its return.</p>",
            flagged.join("; ")
        );
    }
    let _ = write!(
        h,
        "<p class=ci>Rank groups: learned variants are ordered by steps to threshold (censored runs count as the budget), then by final clean success. Walking down that order, a variant stays in the group of the leader above it unless the stratified bootstrap interval of its steps ratio to that leader lies entirely above 1, or the interval of its clean-success difference lies entirely below 0; intervals at {:.1}% ({conf:.0}% Bonferroni-adjusted for the number of comparisons). Variants in one group cannot be told apart with these seeds. Effects are against the reference <b>{}</b>: IQM ratio or difference, with {conf:.0}% stratified bootstrap intervals. The classical controller is a yardstick: it is not ranked and gets no p-value.</p>",
        s.group_confidence * 100.0,
        esc(&s.reference)
    );
    pairwise(h, s);
    h.push_str("</div>");
}

fn notes(v: &VariantSummary) -> String {
    let mut notes = Vec::new();
    if v.gaming.is_some() {
        notes.push("<span class=flag>return rose while clean success fell</span>".to_string());
    }
    if v.crashing.is_some() {
        notes.push("<span class=flag>episodes shortened by collisions</span>".to_string());
    }
    for (status, label) in [
        (RunStatus::Diverged, "diverged"),
        (RunStatus::Interrupted, "interrupted"),
        (RunStatus::Running, "running"),
        (RunStatus::Missing, "missing"),
    ] {
        let n = v.status.get(status);
        if n > 0 {
            notes.push(format!("<span class=tag>{n} {label}</span>"));
        }
    }
    notes.join(" ")
}

/// Probability of improvement and Mann-Whitney p against the reference, learned variants only.
fn pairwise(h: &mut String, s: &StudySummary) {
    let rows: Vec<&VariantSummary> = s
        .ranking()
        .into_iter()
        .map(|i| &s.variants[i])
        .filter(|v| v.vs_reference.is_some())
        .collect();
    if rows.is_empty() {
        return;
    }
    let _ = write!(
        h,
        "<details><summary>Pairwise tests against {}</summary><table><tr><th>variant</th><th>P(better final clean success)<br><span class=ci>[CI]</span></th><th>P(fewer steps)<br><span class=ci>[CI]</span></th><th>Mann-Whitney p<br><span class=ci>final clean success / steps</span></th></tr>",
        esc(&s.reference)
    );
    for v in rows {
        let c = v.vs_reference.as_ref().expect("filtered");
        let _ = write!(
            h,
            "<tr><td>{}</td><td class=num>{}</td><td class=num>{}</td><td class=num>{} / {}</td></tr>",
            swatch(v),
            est_num(&c.poi_final_success),
            est_num(&c.poi_steps),
            p_cell(c.mw_final_success),
            p_cell(c.mw_steps)
        );
    }
    h.push_str("</table><p class=ci>P(…) is the probability that a random run of the variant beats a random run of the reference. p-values are not corrected for multiple comparisons; the rank groups above are.</p></details>");
}

fn summary_table(h: &mut String, s: &StudySummary) {
    h.push_str("<h2>Summary table</h2><p class=ci>IQM across runs with the bootstrap confidence interval (for the classical controller: the interval over its evaluation episodes); final figures are means over the last evaluations of each run. The same numbers, with means, are in summary.csv.</p><div style=\"overflow-x:auto\"><table><tr><th>variant</th><th>runs<br><span class=ci>done/planned</span></th><th>AUC<br><span class=ci>success curve, 0–1</span></th>");
    for (_, m, _) in with_final() {
        if m.unit.is_empty() {
            let _ = write!(h, "<th>{}</th>", esc(m.head));
        } else {
            let _ = write!(
                h,
                "<th>{}<br><span class=ci>{}</span></th>",
                esc(m.head),
                esc(m.unit)
            );
        }
    }
    h.push_str("</tr>");
    for v in &s.variants {
        let _ = write!(
            h,
            "<tr><td>{}</td><td class=num>{}/{}</td>",
            swatch(v),
            v.status.done,
            v.status.total()
        );
        let _ = write!(h, "<td class=num>{}</td>", est_g(&v.auc.iqm));
        for (id, _, _) in with_final() {
            let _ = write!(h, "<td class=num>{}</td>", est_g(&v.figure(id).iqm));
        }
        h.push_str("</tr>");
    }
    h.push_str("</table></div>");
}

fn changes(h: &mut String, s: &StudySummary) {
    h.push_str("<h2>What each variant changed</h2><table><tr><th>variant</th><th>kind</th><th>changes relative to the base experiment</th><th>curriculum</th></tr>");
    for v in &s.variants {
        let mut c = String::new();
        if v.info.changes.is_empty() {
            c.push_str("<span class=na>none (the base configuration)</span>");
        }
        for ch in &v.info.changes {
            let base = if ch.base == "(unset)" {
                "<span class=na>default</span>".to_string()
            } else {
                esc(&ch.base)
            };
            let _ = write!(
                c,
                "<code>{}</code>: {base} → <b>{}</b><br>",
                esc(&ch.key),
                esc(&ch.value)
            );
        }
        if let Some(g) = &v.info.grid {
            let cells: Vec<String> = g
                .iter()
                .map(|(k, x)| format!("<code>{}</code> = {x}", esc(k)))
                .collect();
            let _ = write!(c, "<span class=tag>grid</span> {}", cells.join(", "));
        }
        let _ = write!(
            h,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            swatch(v),
            match v.info.kind {
                VariantKind::Learned => "learned",
                VariantKind::Baseline => "baseline",
            },
            c,
            esc(if v.info.curriculum.is_empty() {
                "—"
            } else {
                &v.info.curriculum
            })
        );
    }
    h.push_str("</table>");
    if !s.study.config_toml.is_empty() {
        let _ = write!(
            h,
            "<details><summary>Experiment file as given</summary><pre>{}</pre></details>",
            esc(&s.study.config_toml)
        );
    }
}
