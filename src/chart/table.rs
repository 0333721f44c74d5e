//! summary.csv: one row per variant with every study figure and its confidence interval, plus the
//! run-status counts, so the numbers behind the charts can be read by other tools. The final figures are
//! those of `analysis::metric::METRICS` (after the AUC), in list order. "success" in a
//! column name always means clean success (goal reached, no contact).

use crate::analysis::metric::with_final;
use crate::analysis::{Aggregate, Estimate, PValueMethod, StudySummary, VariantKind};

/// Column names of summary.csv, in order.
pub fn header() -> Vec<String> {
    let mut h: Vec<String> = [
        "variant",
        "kind",
        "is_reference",
        "runs_planned",
        "done",
        "diverged",
        "interrupted",
        "running",
        "missing",
        "steps_to_threshold_iqm",
        "steps_to_threshold_lo",
        "steps_to_threshold_hi",
        "steps_to_threshold_reached",
        "steps_to_threshold_censored",
        "steps_to_threshold_pending",
        "steps_to_threshold_iqm_is_lower_bound",
        "rank_group",
        "interval_basis",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    let keys = std::iter::once("auc").chain(with_final().map(|(_, _, f)| f.key));
    for m in keys {
        for suffix in ["n", "iqm", "iqm_lo", "iqm_hi", "mean", "mean_lo", "mean_hi"] {
            h.push(format!("{m}_{suffix}"));
        }
    }
    for c in [
        "steps_ratio_vs_reference",
        "steps_ratio_vs_reference_lo",
        "steps_ratio_vs_reference_hi",
        "clean_success_diff_vs_reference",
        "clean_success_diff_vs_reference_lo",
        "clean_success_diff_vs_reference_hi",
        "auc_diff_vs_reference",
        "auc_diff_vs_reference_lo",
        "auc_diff_vs_reference_hi",
        "collision_rate_diff_vs_reference",
        "collision_rate_diff_vs_reference_lo",
        "collision_rate_diff_vs_reference_hi",
        "poi_final_success",
        "poi_final_success_lo",
        "poi_final_success_hi",
        "poi_fewer_steps",
        "poi_fewer_steps_lo",
        "poi_fewer_steps_hi",
        "mw_p_final_success",
        "mw_method_final_success",
        "mw_p_steps_to_threshold",
        "mw_method_steps_to_threshold",
        "reward_gaming_flag",
        "crash_shortening_flag",
    ] {
        h.push(c.into());
    }
    h
}

fn num(x: f64) -> String {
    if x.is_finite() {
        format!("{x}")
    } else {
        String::new()
    }
}

fn est(e: &Estimate) -> [String; 3] {
    [num(e.point), num(e.lo), num(e.hi)]
}

fn agg_cells(a: &Aggregate) -> Vec<String> {
    let mut v = vec![a.n.to_string()];
    v.extend(est(&a.iqm));
    v.extend(est(&a.mean));
    v
}

fn method(m: PValueMethod) -> &'static str {
    match m {
        PValueMethod::Exact => "exact",
        PValueMethod::Normal => "normal",
    }
}

/// The CSV text.
pub fn summary_csv(s: &StudySummary) -> Result<Vec<u8>, csv::Error> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(header())?;
    for v in &s.variants {
        let mut row: Vec<String> = vec![
            v.info.name.clone(),
            match v.info.kind {
                VariantKind::Learned => "learned".into(),
                VariantKind::Baseline => "baseline".into(),
            },
            (v.info.name == s.reference).to_string(),
            v.status.total().to_string(),
            v.status.done.to_string(),
            v.status.diverged.to_string(),
            v.status.interrupted.to_string(),
            v.status.running.to_string(),
            v.status.missing.to_string(),
        ];
        let t = &v.steps_to_threshold;
        row.extend(est(&t.iqm));
        row.extend([
            t.reached.to_string(),
            t.censored.to_string(),
            t.pending.to_string(),
            t.lower_bound.to_string(),
            v.group.map(|g| (g + 1).to_string()).unwrap_or_default(),
            if v.episode_level.is_some() {
                "evaluation episodes (Wilson)".to_string()
            } else {
                "seeds (stratified bootstrap)".to_string()
            },
        ]);
        row.extend(agg_cells(&v.auc));
        for (id, _, _) in with_final() {
            row.extend(agg_cells(&v.figure(id)));
        }
        match &v.vs_reference {
            Some(c) => {
                let e = &c.effects;
                for x in [
                    &e.steps_ratio,
                    &e.success_diff,
                    &e.auc_diff,
                    &e.collision_diff,
                ] {
                    row.extend(est(x));
                }
                row.extend(est(&c.poi_final_success));
                row.extend(est(&c.poi_steps));
                for mw in [&c.mw_final_success, &c.mw_steps] {
                    match mw {
                        Some(m) => row.extend([num(m.p_value), method(m.method).to_string()]),
                        None => row.extend([String::new(), String::new()]),
                    }
                }
            }
            None => row.extend(std::iter::repeat_n(String::new(), 22)),
        }
        row.push(v.gaming.is_some().to_string());
        row.push(v.crashing.is_some().to_string());
        w.write_record(&row)?;
    }
    w.into_inner().map_err(|e| e.into_error().into())
}
