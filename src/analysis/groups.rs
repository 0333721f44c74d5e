//! Rank groups: the one rule termwise uses to say that a variant is behind another — in the report's
//! ranking, in racing decisions and in the robustness ranking of the probe conditions. Walking down a
//! ranking, a variant stays in the group of the leader above it unless a stratified bootstrap interval
//! (Bonferroni-adjusted for the number of comparisons) lies entirely on the worse side.

use super::bootstrap::{bootstrap_distribution, percentile_interval, stream_seed, Estimate};
use super::stats::iqm;

/// Bootstrap stream labels of the two group comparisons (kept from the first report, so its intervals
/// stay the same numbers).
pub const TAG_GROUP_STEPS: u64 = 40;
pub const TAG_GROUP_SUCCESS: u64 = 41;

/// One ranked variant's per-run figures.
#[derive(Debug, Clone, Copy)]
pub struct Ranked<'a> {
    /// The variant's index (labels its bootstrap streams, so the same variants give the same numbers
    /// whichever subset is ranked).
    pub index: usize,
    /// Steps to the success threshold per run (censored runs at the budget); empty when not compared on
    /// steps (probe robustness).
    pub steps: &'a [f64],
    /// The higher-is-better figure per run (final clean success).
    pub success: &'a [f64],
}

/// Where one ranked variant landed and what its intervals against its group's leader were.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Placed {
    /// The variant's index.
    pub index: usize,
    /// Rank group (0 = cannot be told apart from the overall leader).
    pub group: usize,
    /// The leader it was compared with (itself for the overall leader).
    pub leader: usize,
    /// IQM steps ratio (this / leader) with its interval at the adjusted level (NONE for the leader or
    /// without steps).
    pub steps_ratio: Estimate,
    /// IQM success difference (this - leader) with its interval at the adjusted level.
    pub success_diff: Estimate,
}

impl Placed {
    /// True when the steps interval lies entirely above 1 (slower than the leader).
    pub fn slower(&self) -> bool {
        self.steps_ratio.lo.is_finite() && self.steps_ratio.lo > 1.0
    }
    /// True when the success interval lies entirely below 0.
    pub fn less_success(&self) -> bool {
        self.success_diff.hi.is_finite() && self.success_diff.hi < 0.0
    }
}

/// The grouping of a ranking.
#[derive(Debug, Clone, PartialEq)]
pub struct Grouping {
    /// Confidence level of each pairwise interval: the study's, Bonferroni-adjusted.
    pub level: f64,
    /// The ranked variants in ranking order.
    pub placed: Vec<Placed>,
}

/// IQM ratio b / a of two samples (NaN when a's IQM is not positive).
pub fn iqm_ratio(s: &[Vec<f64>]) -> f64 {
    let d = iqm(&s[0]);
    if d > 0.0 {
        iqm(&s[1]) / d
    } else {
        f64::NAN
    }
}

/// The ranking key of the report: steps-to-threshold IQM ascending, then final clean success IQM
/// descending (undefined values last), then position. `keys` holds (index, steps IQM, success IQM).
pub fn rank_order(keys: &[(usize, f64, f64)]) -> Vec<usize> {
    let mut k: Vec<(usize, f64, f64)> = keys
        .iter()
        .map(|&(i, steps, success)| {
            let steps = if steps.is_finite() {
                steps
            } else {
                f64::INFINITY
            };
            let success = if success.is_finite() {
                success
            } else {
                f64::NEG_INFINITY
            };
            (i, steps, -success)
        })
        .collect();
    k.sort_by(|a, b| {
        a.1.total_cmp(&b.1)
            .then(a.2.total_cmp(&b.2))
            .then(a.0.cmp(&b.0))
    });
    k.into_iter().map(|x| x.0).collect()
}

/// The two intervals of `r` against `l` at `level`: the IQM steps ratio (r / l) and the IQM success
/// difference (r - l), each a stratified percentile bootstrap on its own stream labelled by the pair.
fn compare(
    l: &Ranked,
    r: &Ranked,
    level: f64,
    resamples: usize,
    seed: u64,
) -> (Estimate, Estimate) {
    let stream = |tag| stream_seed(seed, &[l.index as u64, r.index as u64, tag]);
    // An empty side (no steps figure) gives no interval: the comparison rests on success alone.
    let steps_ratio = bootstrap_distribution(
        &[l.steps, r.steps],
        iqm_ratio,
        resamples,
        stream(TAG_GROUP_STEPS),
    )
    .map(|(p, v)| percentile_interval(p, &v, level))
    .unwrap_or(Estimate::NONE);
    let success_diff = bootstrap_distribution(
        &[l.success, r.success],
        |x| iqm(&x[1]) - iqm(&x[0]),
        resamples,
        stream(TAG_GROUP_SUCCESS),
    )
    .map(|(p, v)| percentile_interval(p, &v, level))
    .unwrap_or(Estimate::NONE);
    (steps_ratio, success_diff)
}

/// Every variant against the leader (the first): group 1 when an interval at
/// `1 - (1 - confidence) / comparisons` lies entirely on the worse side, else 0. The same intervals as
/// `rank_groups` draws for the leader's own group, without its walk: a variant is not put behind for
/// ranking below one that is (racing's rule, which must never stop a variant without evidence against it).
pub fn against_leader(ranked: &[Ranked], confidence: f64, resamples: usize, seed: u64) -> Grouping {
    let comparisons = ranked.len().saturating_sub(1).max(1);
    let level = 1.0 - (1.0 - confidence) / comparisons as f64;
    let Some(l) = ranked.first() else {
        return Grouping {
            level,
            placed: Vec::new(),
        };
    };
    let placed = ranked
        .iter()
        .enumerate()
        .map(|(k, r)| {
            let (steps_ratio, success_diff) = if k == 0 {
                (Estimate::NONE, Estimate::NONE)
            } else {
                compare(l, r, level, resamples, seed)
            };
            let mut p = Placed {
                index: r.index,
                group: 0,
                leader: l.index,
                steps_ratio,
                success_diff,
            };
            p.group = usize::from(p.slower() || p.less_success());
            p
        })
        .collect();
    Grouping { level, placed }
}

/// Rank groups of variants given best first (Dunn, "Multiple comparisons among means", JASA 1961, for
/// the Bonferroni adjustment). Each variant is compared with the leader of the current group: it starts
/// a new group when the stratified bootstrap interval of its steps ratio to the leader lies entirely
/// above 1 or the interval of its success difference lies entirely below 0, each at
/// `1 - (1 - confidence) / comparisons`. `seed` and the variant indices label the bootstrap streams.
pub fn rank_groups(ranked: &[Ranked], confidence: f64, resamples: usize, seed: u64) -> Grouping {
    let comparisons = ranked.len().saturating_sub(1).max(1);
    let level = 1.0 - (1.0 - confidence) / comparisons as f64;
    let mut placed: Vec<Placed> = Vec::with_capacity(ranked.len());
    let mut leader: Option<&Ranked> = None;
    let mut group = 0usize;
    for r in ranked {
        let Some(l) = leader else {
            leader = Some(r);
            placed.push(Placed {
                index: r.index,
                group: 0,
                leader: r.index,
                steps_ratio: Estimate::NONE,
                success_diff: Estimate::NONE,
            });
            continue;
        };
        let (steps_ratio, success_diff) = compare(l, r, level, resamples, seed);
        let mut p = Placed {
            index: r.index,
            group,
            leader: l.index,
            steps_ratio,
            success_diff,
        };
        if p.slower() || p.less_success() {
            group += 1;
            leader = Some(r);
        }
        p.group = group;
        placed.push(p);
    }
    Grouping { level, placed }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn order_is_steps_then_success_then_position() {
        let keys = [
            (0, 300.0, 0.5),
            (1, 100.0, 0.2),
            (2, 100.0, 0.9),
            (3, f64::NAN, 1.0),
            (4, 300.0, 0.5),
        ];
        assert_eq!(rank_order(&keys), vec![2, 1, 0, 4, 3]);
    }

    #[test]
    fn complete_separation_splits_and_overlap_does_not() {
        // A percentile bootstrap interval cannot reach past the most extreme resample: with every run of
        // `behind` below every run of the leader the difference interval ends below 0 (Efron & Tibshirani,
        // "An Introduction to the Bootstrap", 1993, ch. 13: the percentile interval lies within the range
        // of the bootstrap replicates); with overlapping runs at 2000 resamples it cannot exclude 0.
        let lead_steps = [100.0, 120.0, 110.0, 105.0];
        let lead = [0.9, 0.92, 0.88, 0.91];
        let behind = [0.5, 0.4, 0.45, 0.55];
        let close = [0.89, 0.93, 0.87, 0.9];
        let g = rank_groups(
            &[
                Ranked {
                    index: 0,
                    steps: &lead_steps,
                    success: &lead,
                },
                Ranked {
                    index: 1,
                    steps: &lead_steps,
                    success: &close,
                },
                Ranked {
                    index: 2,
                    steps: &lead_steps,
                    success: &behind,
                },
            ],
            0.95,
            2000,
            7,
        );
        assert_eq!(g.level, 1.0 - 0.05 / 2.0);
        let groups: Vec<usize> = g.placed.iter().map(|p| p.group).collect();
        assert_eq!(groups, vec![0, 0, 1]);
        assert!(g.placed[2].less_success() && !g.placed[2].slower());
        assert_eq!(g.placed[2].leader, 0);
        // The observed difference is the IQM difference: (0.5+0.45)/2 - (0.9+0.91)/2.
        assert!((g.placed[2].success_diff.point - (0.475 - 0.905)).abs() < 1e-12);
    }

    #[test]
    fn the_walk_puts_a_variant_behind_for_ranking_below_a_split_and_against_leader_does_not() {
        // Three variants: `mid` overlaps both neighbours, `low` lies wholly below the leader. The walk compares
        // `mid` with the leader (no split) and `low` with the leader (split); with `low` ranked above `mid` (by
        // steps), the walk leaves `mid` behind `low`'s split without any interval against `mid` itself.
        let steps_fast = [100.0, 100.0, 100.0, 100.0];
        let steps_slow = [200.0, 200.0, 200.0, 200.0];
        let lead = [0.9, 0.92, 0.88, 0.91];
        let low = [0.5, 0.45, 0.55, 0.52];
        let mid = [0.5, 0.92, 0.6, 0.9];
        let ranked = [
            Ranked {
                index: 0,
                steps: &steps_fast,
                success: &lead,
            },
            Ranked {
                index: 1,
                steps: &steps_fast,
                success: &low,
            },
            Ranked {
                index: 2,
                steps: &steps_slow,
                success: &mid,
            },
        ];
        let walk = rank_groups(&ranked, 0.95, 2000, 3);
        let direct = against_leader(&ranked, 0.95, 2000, 3);
        assert_eq!(walk.placed[1].group, 1);
        assert_eq!(direct.placed[1].group, 1, "wholly below the leader");
        // Same steps-ratio numbers against the leader for `low` in both (same streams, same level).
        assert_eq!(
            format!("{:?}", walk.placed[1]),
            format!("{:?}", direct.placed[1])
        );
        // `mid`: the walk compares it with `low` (its new leader) and keeps it behind the leader's group;
        // against the leader its steps ratio is 2 exactly (every resample), so it is behind too on steps...
        assert!(direct.placed[2].slower());
        // ...but with the steps equal it is not: only the walk would put it behind.
        let ranked = [
            Ranked {
                index: 0,
                steps: &steps_fast,
                success: &lead,
            },
            Ranked {
                index: 1,
                steps: &steps_fast,
                success: &low,
            },
            Ranked {
                index: 2,
                steps: &steps_fast,
                success: &mid,
            },
        ];
        let walk = rank_groups(&ranked, 0.95, 2000, 3);
        let direct = against_leader(&ranked, 0.95, 2000, 3);
        assert_eq!(walk.placed[2].group, 1, "behind by the walk");
        assert_eq!(
            direct.placed[2].group, 0,
            "no interval against it puts it behind the leader"
        );
    }
}
