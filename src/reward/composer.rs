//! The composer: evaluates the enabled reward terms every step, returns their weighted sum, keeps each
//! term's value for this step and its sum over the episode, and decides whether a state ends the episode.
//! `step` does not allocate.

use super::track::{Foot, PathTrack};
use super::{RewardSpec, Term, Transition};
use crate::plan::ReferencePath;
use crate::sim::StepReport;

/// Weighted sum of reward terms with per-term bookkeeping.
///
/// Usage per episode: `reset(first_report, path)`, then for every step `step(&prev, &now)`; after a
/// replan call `set_path` (before or after the `step` of that transition: both ends of every transition are
/// always measured on the same path). `ends_episode(&now)` says whether `now` is terminal.
#[derive(Debug)]
pub struct Composer {
    names: Vec<&'static str>,
    /// Enabled terms with their weights, in registry order.
    active: Vec<(Box<dyn Term>, f64)>,
    /// Every present term (also weight 0), asked whether a state is terminal.
    present: Vec<Box<dyn Term>>,
    values: Vec<f64>,
    sums: Vec<f64>,
    total_sum: f64,
    gamma: f64,
    needs_path: bool,
    track: PathTrack,
    /// The last projected effector position and its foot on the current track.
    cache: Option<([f64; 2], Foot)>,
}

impl Composer {
    /// A composer for `spec` with the learner's discount factor `gamma` (used by potential shaping).
    ///
    /// # Panics
    /// If `gamma` is not in [0, 1] (the learner validates its own discount).
    pub fn new(spec: &RewardSpec, gamma: f64) -> Composer {
        assert!(
            (0.0..=1.0).contains(&gamma),
            "discount gamma must lie in [0, 1], got {gamma}"
        );
        let active: Vec<(Box<dyn Term>, f64)> = spec
            .enabled()
            .map(|t| ((t.info.build)(&t.params), t.weight))
            .collect();
        let present = spec
            .present
            .iter()
            .map(|t| (t.info.build)(&t.params))
            .collect();
        let n = active.len();
        Composer {
            names: spec.term_names(),
            needs_path: active.iter().any(|(t, _)| t.needs_path()),
            active,
            present,
            values: vec![0.0; n],
            sums: vec![0.0; n],
            total_sum: 0.0,
            gamma,
            track: PathTrack::new(),
            cache: None,
        }
    }

    /// Names of the enabled terms, in the order of `terms` and `episode_sums`.
    pub fn names(&self) -> &[&'static str] {
        &self.names
    }

    /// The discount factor used for potential shaping.
    pub fn gamma(&self) -> f64 {
        self.gamma
    }

    /// Start an episode at the state reported by `first`, following `path` (if any). Clears the sums.
    pub fn reset(&mut self, first: &StepReport, path: Option<&ReferencePath>) {
        self.set_path(path);
        self.values.iter_mut().for_each(|v| *v = 0.0);
        self.sums.iter_mut().for_each(|v| *v = 0.0);
        self.total_sum = 0.0;
        if self.needs_path && self.track.is_loaded() {
            self.cache = Some((first.ee, self.track.foot(first.ee)));
        }
    }

    /// Follow a new reference path (after a replan), or none. Reuses storage.
    pub fn set_path(&mut self, path: Option<&ReferencePath>) {
        match path {
            Some(p) => self.track.load(&p.points),
            None => self.track.load(&[]),
        }
        self.cache = None;
    }

    /// Whether the state reported by `now` ends the episode: the goal is reached, or a present term (e.g.
    /// `collision` with terminate = true) declares it terminal. Horizon time-outs are not terminal (they
    /// truncate the episode; the learner bootstraps from the value there).
    pub fn ends_episode(&self, now: &StepReport) -> bool {
        now.reached_goal || self.present.iter().any(|t| t.ends_episode(now))
    }

    #[inline]
    fn foot(&mut self, ee: [f64; 2]) -> Foot {
        match self.cache {
            Some((p, f)) if p == ee => f,
            _ => self.track.foot(ee),
        }
    }

    /// Reward of the transition `prev` -> `now`: the weighted sum of the enabled terms. Records each term's
    /// weighted value (`terms`) and adds it to the episode sums.
    pub fn step(&mut self, prev: &StepReport, now: &StepReport) -> f64 {
        let (path_prev, path_now) = if self.needs_path && self.track.is_loaded() {
            let fp = self.foot(prev.ee);
            let fnow = self.track.foot(now.ee);
            self.cache = Some((now.ee, fnow));
            (
                Some(self.track.point(fp, prev.goal)),
                Some(self.track.point(fnow, now.goal)),
            )
        } else {
            (None, None)
        };
        let tr = Transition {
            prev,
            now,
            path_prev,
            path_now,
            gamma: self.gamma,
            terminal: self.ends_episode(now),
        };
        let mut total = 0.0;
        for (i, (term, w)) in self.active.iter().enumerate() {
            let v = w * term.value(&tr);
            self.values[i] = v;
            self.sums[i] += v;
            total += v;
        }
        self.total_sum += total;
        total
    }

    /// Each enabled term's weighted value in the last step (same order as `names`).
    pub fn terms(&self) -> &[f64] {
        &self.values
    }

    /// Each enabled term's weighted sum over the episode so far.
    pub fn episode_sums(&self) -> &[f64] {
        &self.sums
    }

    /// The undiscounted episode return so far (sum of `episode_sums`).
    pub fn episode_total(&self) -> f64 {
        self.total_sum
    }
}
