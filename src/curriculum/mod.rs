//! `curriculum`: reset curricula that decide each training episode's start state, goal and difficulty, with
//! feedback from episode outcomes. A new curriculum is one file (the curriculum, its params struct with serde,
//! `Default` and `validate`, and its `INFO`) plus its `mod` line and one line in `REGISTRY`.

mod along_path;
mod reverse;
mod staged;
mod uniform;

pub use along_path::AlongPath;
pub use reverse::Reverse;
pub use staged::{Stage, Staged};
pub use uniform::Uniform;

use crate::config::ConfigError;
use crate::sim::{ArmEnv, ArmState};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::collections::VecDeque;

/// What a curriculum decides for one training episode.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct EpisodeDraw {
    /// Start state (at rest unless the curriculum says otherwise).
    pub start: ArmState,
    /// Goal point, m.
    pub goal: [f64; 2],
    /// How many of the scenario's obstacles are active.
    pub obstacles: usize,
    /// Random goal jumps per second.
    pub jump_rate: f64,
    /// Start from a random waypoint of the reference path (at rest) instead of `start`.
    pub start_on_path: bool,
}

/// A reset curriculum.
///
/// ```
/// use termwise::curriculum::{Curriculum, Uniform};
/// let c = Uniform::default();
/// assert_eq!(c.name(), "uniform");
/// assert_eq!(c.level(), 1.0);
/// ```
pub trait Curriculum: Send {
    /// The TOML name.
    fn name(&self) -> &'static str;
    /// Draw the next training episode. `env` is rewound to t = 0 with all scenario obstacles active;
    /// `env_steps` is the run's environment step count so far.
    fn draw(&mut self, env: &ArmEnv, env_steps: u64, rng: &mut ChaCha8Rng) -> EpisodeDraw;
    /// Feedback when an episode ends.
    fn feedback(&mut self, _success: bool, _env_steps: u64) {}
    /// Current difficulty in [0, 1] (1 = the full task).
    fn level(&self) -> f64;
}

/// The scenario's full-difficulty episode: uniform random start and goal, every obstacle, the scenario's jump rate.
pub fn full_task_draw(env: &ArmEnv, rng: &mut ChaCha8Rng) -> EpisodeDraw {
    EpisodeDraw {
        start: env.sample_start(rng),
        goal: env.sample_goal(rng),
        obstacles: env.scenario().obstacles.len(),
        jump_rate: env.scenario().events.goal_jump_rate,
        start_on_path: false,
    }
}

/// Success rate over the most recent episodes (fixed window).
#[derive(Clone, Debug)]
pub struct SuccessWindow {
    window: usize,
    recent: VecDeque<bool>,
}

impl SuccessWindow {
    pub fn new(window: usize) -> Self {
        SuccessWindow {
            window: window.max(1),
            recent: VecDeque::with_capacity(window.max(1)),
        }
    }
    pub fn push(&mut self, success: bool) {
        if self.recent.len() == self.window {
            self.recent.pop_front();
        }
        self.recent.push_back(success);
    }
    /// Success rate once the window is full, else None.
    pub fn rate(&self) -> Option<f64> {
        (self.recent.len() == self.window)
            .then(|| self.recent.iter().filter(|s| **s).count() as f64 / self.window as f64)
    }
    pub fn clear(&mut self) {
        self.recent.clear();
    }
}

/// Most episodes in a curriculum's success window (`window`).
pub const MAX_WINDOW: usize = 100_000;
/// Most stages of the `staged` curriculum.
pub const MAX_STAGES: usize = 100;

/// The `[curriculum]` table: `kind` plus the parameters of that kind, which its own params struct reads
/// (`validate` checks them; keys of another curriculum are rejected).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct CurriculumSpec {
    /// Which curriculum (a name in `REGISTRY`). Default `uniform`.
    #[serde(default = "default_kind")]
    pub kind: String,
    /// The kind's parameters as written (absent ones take the params struct's `Default`).
    #[serde(flatten)]
    pub params: toml::Table,
}

fn default_kind() -> String {
    "uniform".into()
}

impl Default for CurriculumSpec {
    fn default() -> Self {
        CurriculumSpec {
            kind: default_kind(),
            params: toml::Table::new(),
        }
    }
}

/// A broken parameter: the key (relative to the `[curriculum]` table) and what to change.
#[derive(Clone, Debug, PartialEq)]
pub struct ParamError {
    pub key: String,
    pub message: String,
}

impl ParamError {
    pub fn new(key: impl Into<String>, message: impl Into<String>) -> ParamError {
        ParamError {
            key: key.into(),
            message: message.into(),
        }
    }
}

/// The parameters of one curriculum: a serde struct whose `Default` holds the documented defaults, a
/// `validate` step, and the curriculum it builds.
pub trait CurriculumParams: Serialize + serde::de::DeserializeOwned + Default {
    /// Check the values; the error names the key.
    fn validate(&self) -> Result<(), ParamError>;
    /// The curriculum these parameters describe (validated first).
    fn build(self) -> Box<dyn Curriculum>;
}

/// Read a params struct from the parameters of a `[curriculum]` table and validate it.
pub fn read_params<P: CurriculumParams>(table: &toml::Table) -> Result<P, ParamError> {
    let p: P =
        serde_path_to_error::deserialize(toml::Value::Table(table.clone())).map_err(|e| {
            let path = e.path().to_string();
            let message = crate::config::plain_words(e.inner().message().trim());
            ParamError::new(if path == "." { String::new() } else { path }, message)
        })?;
    p.validate()?;
    Ok(p)
}

/// A params struct's defaults as JSON (JSON rather than TOML: it holds every unsigned integer).
pub fn default_params<P: CurriculumParams>() -> serde_json::Value {
    serde_json::to_value(P::default()).unwrap_or(serde_json::Value::Null)
}

/// Read, validate and build a curriculum from its parameters.
pub fn build_from<P: CurriculumParams>(
    table: &toml::Table,
) -> Result<Box<dyn Curriculum>, ParamError> {
    read_params::<P>(table).map(P::build)
}

/// One registered curriculum. The defaults live once, in its params struct's `Default`.
pub struct CurriculumInfo {
    /// The TOML name (`[curriculum] kind`).
    pub name: &'static str,
    /// One-line meaning.
    pub meaning: &'static str,
    /// Each parameter's name and meaning (with unit), in listing order.
    pub params: &'static [(&'static str, &'static str)],
    /// The params struct's defaults (`default_params::<P>`).
    pub defaults: fn() -> serde_json::Value,
    /// Read, validate and build (`build_from::<P>`).
    pub build: fn(&toml::Table) -> Result<Box<dyn Curriculum>, ParamError>,
}

/// Every built-in curriculum: one line each.
pub const REGISTRY: &[CurriculumInfo] =
    &[uniform::INFO, along_path::INFO, reverse::INFO, staged::INFO];

/// The registered curriculum called `name`.
pub fn find(name: &str) -> Option<&'static CurriculumInfo> {
    REGISTRY.iter().find(|c| c.name == name)
}

/// A default value as the listing shows it.
fn shown(v: Option<&serde_json::Value>) -> String {
    match v {
        Some(serde_json::Value::Array(a)) => format!("{} entries", a.len()),
        Some(v) => v.to_string(),
        None => "-".into(),
    }
}

/// The listing of `termwise curricula`: every registered curriculum with its parameters.
pub fn describe_curricula() -> String {
    use std::fmt::Write as _;
    let mut s = String::from(
        "Reset curricula. Pick one with [curriculum] kind = \"<name>\" in the experiment file and set its\n\
         parameters in the same table (a key of another curriculum is an error).\n\n",
    );
    for c in REGISTRY {
        let _ = writeln!(s, "{}  {}", c.name, c.meaning);
        if c.params.is_empty() {
            let _ = writeln!(s, "  (no parameters)");
        } else {
            let defaults = (c.defaults)();
            let _ = writeln!(s, "  {:<24} {:<10} meaning", "parameter", "default");
            for (name, meaning) in c.params {
                let d = shown(defaults.get(name));
                let _ = writeln!(s, "  {name:<24} {d:<10} {meaning}");
            }
        }
        s.push('\n');
    }
    s
}

/// Check a unit-interval parameter.
pub fn check_unit(key: &str, x: f64) -> Result<(), ParamError> {
    if (0.0..=1.0).contains(&x) {
        Ok(())
    } else {
        Err(ParamError::new(key, format!("must be in [0, 1], got {x}")))
    }
}

/// Check a success-window length.
pub fn check_window(w: usize) -> Result<(), ParamError> {
    if w == 0 || w > MAX_WINDOW {
        return Err(ParamError::new(
            "window",
            format!("must be in 1..={MAX_WINDOW} episodes, got {w}"),
        ));
    }
    Ok(())
}

impl CurriculumSpec {
    /// Check the kind and its parameters; `prefix` is the key path of the table (e.g. `curriculum`).
    pub fn validate(&self, origin: &str, src: &str, prefix: &str) -> Result<(), ConfigError> {
        let err = |k: &str, m: String| {
            let path = if k.is_empty() {
                prefix.to_string()
            } else {
                format!("{prefix}.{k}")
            };
            ConfigError::at(origin, src, &path, m)
        };
        let info = find(&self.kind).ok_or_else(|| {
            let names: Vec<_> = REGISTRY.iter().map(|c| c.name).collect();
            let hint = crate::reward::nearest(&self.kind, &names)
                .map(|n| format!(" (did you mean `{n}`?)"))
                .unwrap_or_default();
            err(
                "kind",
                format!(
                    "unknown curriculum `{}`{hint}; known: {}",
                    self.kind,
                    names.join(", ")
                ),
            )
        })?;
        for k in self.params.keys() {
            if !info.params.iter().any(|p| p.0 == k) {
                let allowed: Vec<_> = info.params.iter().map(|p| p.0).collect();
                return Err(err(
                    k,
                    format!(
                        "does not apply to curriculum `{}` (its keys: {})",
                        self.kind,
                        if allowed.is_empty() {
                            "none".to_string()
                        } else {
                            allowed.join(", ")
                        }
                    ),
                ));
            }
        }
        (info.build)(&self.params)
            .map(|_| ())
            .map_err(|e| err(&e.key, e.message))
    }

    /// Build the curriculum (call `validate` first; an invalid spec falls back to `uniform` with an error
    /// logged, which `validate` rules out).
    pub fn build(&self) -> Box<dyn Curriculum> {
        match find(&self.kind).map(|info| (info.build)(&self.params)) {
            Some(Ok(c)) => c,
            _ => {
                tracing::error!(
                    "curriculum `{}` with {:?} did not validate; using uniform",
                    self.kind,
                    self.params
                );
                Box::new(Uniform)
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn validation_rejects_foreign_and_bad_keys() {
        let with = |kind: &str, key: &str, v: toml::Value| CurriculumSpec {
            kind: kind.into(),
            params: [(key.to_string(), v)].into_iter().collect(),
        };
        let mut s = with("uniform", "start_radius", toml::Value::Float(0.5));
        let e = s
            .validate("x.toml", "", "curriculum")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("curriculum.start_radius") && e.contains("does not apply"),
            "{e}"
        );
        s = CurriculumSpec {
            kind: "backwards".into(),
            ..Default::default()
        };
        let e = s
            .validate("x.toml", "", "curriculum")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("known: uniform, along-path, reverse, staged"),
            "{e}"
        );
        s = with(
            "along-path",
            "path_start_probability",
            toml::Value::Float(1.5),
        );
        let e = s.validate("x.toml", "", "curriculum").unwrap_err();
        assert_eq!(e.path, "curriculum.path_start_probability", "{e}");
        s = with("reverse", "start_radius", toml::Value::Float(0.2));
        assert!(s.validate("x.toml", "", "curriculum").is_ok());
        s = with("reverse", "window", toml::Value::String("forty".into()));
        let e = s.validate("x.toml", "", "curriculum").unwrap_err();
        assert_eq!(e.path, "curriculum.window", "{e}");
    }

    #[test]
    fn every_listed_parameter_has_a_default_and_every_default_is_listed() {
        for c in REGISTRY {
            let d = (c.defaults)();
            let keys: Vec<&str> = d
                .as_object()
                .map(|o| o.keys().map(String::as_str).collect())
                .unwrap_or_default();
            let mut listed: Vec<&str> = c.params.iter().map(|p| p.0).collect();
            let mut keys = keys;
            keys.sort();
            listed.sort();
            assert_eq!(keys, listed, "{}", c.name);
        }
        let text = describe_curricula();
        assert!(
            text.contains("along-path") && text.contains("path_start_probability   0.5"),
            "{text}"
        );
    }

    #[test]
    fn success_window_rate() {
        let mut w = SuccessWindow::new(4);
        for s in [true, false, true] {
            w.push(s);
        }
        assert_eq!(w.rate(), None);
        w.push(true);
        assert_eq!(w.rate(), Some(0.75));
        w.push(false); // window now false, true, true, false
        assert_eq!(w.rate(), Some(0.5));
    }
}
