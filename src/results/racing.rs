//! Racing in the results format: the plan study.json records (`RacingPlan`) and racing.json, the decisions
//! taken so far (`RacingRecord`), rewritten whole after every rung by whichever process takes the decision
//! (the decision is a pure function of the finished runs, so every process writes the same bytes).

use super::{read_json, write_json, ResultsError};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// The racing decisions of a study.
pub const RACING_FILE: &str = "racing.json";

/// What study.json records of the racing settings.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct RacingPlan {
    /// Fractions of each variant's budget (its seeds x steps) at which a rung decides.
    pub rungs: Vec<f64>,
    /// Seeds every racing variant has finished at each rung (ceil(fraction x seeds)).
    pub rung_seeds: Vec<u64>,
    /// Most seeds a variant can get from reinvested budget.
    pub max_seeds: u64,
    /// Confidence of the rank-group intervals before their Bonferroni adjustment.
    pub confidence: f64,
}

/// A point estimate with its interval (absent when undefined).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Interval {
    pub point: f64,
    pub lo: f64,
    pub hi: f64,
}

impl Interval {
    /// The interval of three numbers, None unless all are finite.
    pub fn of(point: f64, lo: f64, hi: f64) -> Option<Interval> {
        (point.is_finite() && lo.is_finite() && hi.is_finite()).then_some(Interval {
            point,
            lo,
            hi,
        })
    }
}

/// One variant at one rung.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct RungEntry {
    pub variant: String,
    /// Still racing after this rung.
    pub kept: bool,
    /// 1 when the intervals put it behind the leader, else 0.
    pub group: u64,
    /// The leader it was compared with.
    pub leader: String,
    /// IQM steps to threshold over the rung's seeds (censored at the budget).
    pub steps_iqm: Option<f64>,
    /// IQM final clean success over the rung's seeds.
    pub success_iqm: Option<f64>,
    /// Steps ratio to the leader with its interval at `level`.
    pub steps_ratio: Option<Interval>,
    /// Clean-success difference to the leader with its interval at `level`.
    pub success_diff: Option<Interval>,
}

/// One rung's decision.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct RungRecord {
    /// 1-based rung number.
    pub rung: u64,
    /// Fraction of each variant's budget spent when it decided.
    pub fraction: f64,
    /// Seeds per variant the decision used (seeds 0..seeds).
    pub seeds: u64,
    /// Confidence of each interval (Bonferroni-adjusted).
    pub level: f64,
    /// The variants that raced at this rung, in ranking order.
    pub entries: Vec<RungEntry>,
}

/// Where one variant stands.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct RaceVariant {
    pub name: String,
    /// Seeds planned for it so far (seeds 0..seeds).
    pub seeds: u64,
    /// The rung at which it stopped (None while racing or once finished in the race).
    pub stopped_at: Option<u64>,
}

/// racing.json.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct RacingRecord {
    /// Rungs decided so far.
    pub rungs: Vec<RungRecord>,
    /// Every learned variant.
    pub variants: Vec<RaceVariant>,
    /// Environment steps the un-raced study would train (learned variants x seeds x budget).
    pub unraced_steps: u64,
    /// Environment steps planned now (finished and still to run).
    pub planned_steps: u64,
    /// Environment steps freed by stopped variants so far.
    pub freed_steps: u64,
    /// Of those, steps given to the remaining variants as further seeds.
    pub reinvested_steps: u64,
}

/// Read racing.json of a results folder (None when there is none).
pub fn read_racing(dir: &Path) -> Result<Option<RacingRecord>, ResultsError> {
    let p = dir.join(RACING_FILE);
    if !p.is_file() {
        return Ok(None);
    }
    read_json(&p).map(Some)
}

/// Write racing.json into a results folder.
pub fn write_racing(dir: &Path, rec: &RacingRecord) -> Result<(), ResultsError> {
    write_json(&dir.join(RACING_FILE), rec)
}
