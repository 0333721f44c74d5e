//! Per-variant checks over the curves: reward-term contributions, reward gaming (success falls while a
//! shaping term grows) and late crashes.

use super::*;
use crate::analysis::metric::{EPISODE_STEPS, REACHED, RETURN};

/// Mean contribution of each reward term at each step, across the variant's runs.
pub(super) fn term_curves(v: &VariantRuns) -> Vec<TermCurve> {
    let mut names: Vec<String> = Vec::new();
    for r in &v.runs {
        for n in &r.terms.names {
            if !names.contains(n) {
                names.push(n.clone());
            }
        }
    }
    names
        .into_iter()
        .map(|name| {
            let mut by_step: BTreeMap<u64, Vec<f64>> = BTreeMap::new();
            for r in &v.runs {
                if let Some(col) = r.terms.names.iter().position(|n| *n == name) {
                    for (step, row) in r.terms.steps.iter().zip(&r.terms.values) {
                        if let Some(&x) = row.get(col).filter(|x| x.is_finite()) {
                            by_step.entry(*step).or_default().push(x);
                        }
                    }
                }
            }
            TermCurve {
                name,
                steps: by_step.keys().copied().collect(),
                mean: by_step.values().map(|xs| mean(xs)).collect(),
            }
        })
        .collect()
}

/// Flag a variant whose mean return rose while its mean success fell: success peaked and then
/// dropped by at least `gaming_success_drop` by the final window, while the return at the end
/// exceeds the return at the success peak by at least `gaming_return_rise` of the return range.
pub(super) fn gaming_check(
    curves: &BTreeMap<MetricId, Curve>,
    final_window: usize,
    opts: &AnalysisOptions,
) -> Option<GamingFlag> {
    let succ = &curves[&SUCCESS];
    let ret = &curves[&RETURN];
    if succ.steps.len() < 3 || succ.steps != ret.steps {
        return None;
    }
    let s: Vec<f64> = succ.points.iter().map(|p| p.mean.point).collect();
    let r: Vec<f64> = ret.points.iter().map(|p| p.mean.point).collect();
    let window = final_window.clamp(1, s.len() - 1);
    let peak = (0..s.len() - window).max_by(|&a, &b| s[a].total_cmp(&s[b]))?;
    let tail = s.len() - window..s.len();
    let s_end = mean(&finite(s[tail.clone()].iter().copied()));
    let r_end = mean(&finite(r[tail].iter().copied()));
    let fin = finite(r.iter().copied());
    let range = fin.iter().copied().fold(f64::NEG_INFINITY, f64::max)
        - fin.iter().copied().fold(f64::INFINITY, f64::min);
    if range.is_nan() || range <= 0.0 {
        return None;
    }
    let drop = s[peak] - s_end;
    let rise = (r_end - r[peak]) / range;
    (drop >= opts.gaming_success_drop && rise >= opts.gaming_return_rise).then_some(GamingFlag {
        peak_step: succ.steps[peak],
        success_drop: drop,
        return_rise: rise,
    })
}

/// Flag a variant whose episodes got shorter through collisions: from the evaluation (before the
/// final window) where the across-seed mean episode length was longest, the length fell by at
/// least `crash_length_drop` of that value by the final window while the mean collision rate
/// rose by at least `crash_collision_rise`, and the length fell by more than the reached rate rose.
/// The last condition rules out shortening by reaching the goal: episodes that newly reach it can
/// shorten the mean by at most their share (an episode cannot get shorter than zero), so a larger
/// drop needs episodes that ended early without reaching the goal.
pub(super) fn crash_check(
    curves: &BTreeMap<MetricId, Curve>,
    final_window: usize,
    opts: &AnalysisOptions,
) -> Option<CrashFlag> {
    let len = &curves[&EPISODE_STEPS];
    let col = &curves[&COLLISION];
    let rea = &curves[&REACHED];
    if len.steps.len() < 3 || len.steps != col.steps || len.steps != rea.steps {
        return None;
    }
    let l: Vec<f64> = len.points.iter().map(|p| p.mean.point).collect();
    let c: Vec<f64> = col.points.iter().map(|p| p.mean.point).collect();
    let r: Vec<f64> = rea.points.iter().map(|p| p.mean.point).collect();
    let window = final_window.clamp(1, l.len() - 1);
    let peak = (0..l.len() - window)
        .filter(|&k| l[k].is_finite() && c[k].is_finite())
        .max_by(|&a, &b| l[a].total_cmp(&l[b]))?;
    let tail = l.len() - window..l.len();
    let l_end = mean(&finite(l[tail.clone()].iter().copied()));
    let c_end = mean(&finite(c[tail.clone()].iter().copied()));
    let r_end = mean(&finite(r[tail].iter().copied()));
    if l[peak].is_nan() || l[peak] <= 0.0 || !l_end.is_finite() || !c_end.is_finite() {
        return None;
    }
    let length_drop = (l[peak] - l_end) / l[peak];
    let collision_rise = c_end - c[peak];
    let reached_rise = r_end - r[peak];
    (length_drop >= opts.crash_length_drop
        && collision_rise >= opts.crash_collision_rise
        && length_drop > reached_rise.max(0.0))
    .then_some(CrashFlag {
        from_step: len.steps[peak],
        collision_rise,
        length_drop,
    })
}
