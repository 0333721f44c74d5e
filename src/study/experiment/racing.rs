//! `[study.racing]`: the racing settings of a study and their validation. Racing stops variants that are
//! clearly behind at rungs (fixed fractions of each variant's budget, spent as seeds) and gives the freed
//! budget to the rest as further seeds; `study::race` runs it.

use super::*;

/// Most rungs.
pub const MAX_RUNGS: usize = 10;
/// Fewest seeds per variant a rung decides on: the rank-group bootstrap intervals separate tied
/// variants by chance far too often below this (measured on synthetic learning curves: at 3 seeds and the
/// racing confidence, 5 tied variants are all kept in only 58% of studies, at 4 seeds in 89%).
pub const MIN_RUNG_SEEDS: u64 = 4;

/// Racing settings as written.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RacingSettings {
    /// Fractions of each variant's budget (its seeds x steps) at which a rung decides, increasing, in
    /// (0, 1). Rung k decides once every racing variant has finished its first ceil(fraction x seeds) seeds.
    pub rungs: Vec<f64>,
    /// Most seeds per variant once the budget of stopped variants is given to the rest. Default: twice
    /// `study.seeds` (at most `MAX_SEEDS`); `study.seeds` gives nothing back, so the budget is saved.
    pub max_seeds: Option<i64>,
    /// Confidence of the rank-group intervals at a rung, before their Bonferroni adjustment. Default 0.99,
    /// stricter than the report's 0.95 because stopping is final (see README, "Racing").
    #[serde(default = "default_confidence")]
    pub confidence: f64,
}

fn default_confidence() -> f64 {
    0.99
}

/// Validated racing settings.
#[derive(Clone, Debug, PartialEq)]
pub struct RaceSpec {
    /// The rung fractions as written.
    pub fractions: Vec<f64>,
    /// Seeds per variant finished at each rung, strictly increasing, each below `study.seeds`.
    pub rung_seeds: Vec<u64>,
    /// Most seeds per variant after reinvestment (at least `study.seeds`).
    pub max_seeds: u64,
    /// Confidence of the rule before the Bonferroni adjustment.
    pub confidence: f64,
}

/// Check `[study.racing]` against the study's seeds and variants.
pub(super) fn validate_racing(
    r: &RacingSettings,
    seeds: i64,
    learned: usize,
    baselines: usize,
    o: &str,
    src: &str,
) -> Result<RaceSpec, ConfigError> {
    let err = |p: &str, m: String| ConfigError::at(o, src, &format!("study.racing.{p}"), m);
    if learned < 2 {
        return Err(err(
            "rungs",
            format!(
                "racing needs at least two learned variants to compare; this study has {learned}"
            ),
        ));
    }
    if r.rungs.is_empty() || r.rungs.len() > MAX_RUNGS {
        return Err(err(
            "rungs",
            format!("give 1 to {MAX_RUNGS} fractions of the budget, e.g. [0.5]"),
        ));
    }
    let mut rung_seeds: Vec<u64> = Vec::new();
    for (k, &f) in r.rungs.iter().enumerate() {
        if !(f > 0.0 && f < 1.0) {
            return Err(err(
                &format!("rungs[{k}]"),
                format!("must be a fraction of the budget strictly between 0 and 1, got {f}"),
            ));
        }
        let n = (f * seeds as f64).ceil() as u64;
        if n < MIN_RUNG_SEEDS {
            return Err(err(
                &format!("rungs[{k}]"),
                format!(
                    "{f} of {seeds} seeds is {n} seed(s) per variant; a rung decides on at least {MIN_RUNG_SEEDS} \
                     (raise the fraction or study.seeds)"
                ),
            ));
        }
        if n >= seeds as u64 {
            return Err(err(
                &format!("rungs[{k}]"),
                format!(
                    "{f} of {seeds} seeds is every seed: a rung must come before the last seed"
                ),
            ));
        }
        if let Some(&prev) = rung_seeds.last() {
            if n <= prev {
                return Err(err(
                    &format!("rungs[{k}]"),
                    format!(
                        "rungs must add seeds: {f} of {seeds} seeds is {n}, the rung before already has {prev}"
                    ),
                ));
            }
        }
        rung_seeds.push(n);
    }
    let max_seeds = r.max_seeds.unwrap_or((2 * seeds).min(MAX_SEEDS));
    if max_seeds < seeds || max_seeds > MAX_SEEDS {
        return Err(err(
            "max_seeds",
            format!(
                "must be in study.seeds..={MAX_SEEDS} ({seeds}..={MAX_SEEDS}), got {max_seeds}"
            ),
        ));
    }
    let runs = learned as i64 * max_seeds + baselines as i64;
    if runs > MAX_RUNS {
        return Err(err(
            "max_seeds",
            format!("{learned} learned variants x {max_seeds} seeds make up to {runs} runs; at most {MAX_RUNS} are allowed"),
        ));
    }
    if !(0.5..1.0).contains(&r.confidence) {
        return Err(err(
            "confidence",
            format!("must be in [0.5, 1), got {}", r.confidence),
        ));
    }
    Ok(RaceSpec {
        fractions: r.rungs.clone(),
        rung_seeds,
        max_seeds: max_seeds as u64,
        confidence: r.confidence,
    })
}
