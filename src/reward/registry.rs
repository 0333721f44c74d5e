//! The registry of reward terms keyed by their TOML name (the list itself is `terms::REGISTRY`): each entry's
//! meaning, sign convention, parameters with defaults, and constructor. Drives parsing, validation, the composer and `termwise terms`.

use super::{terms, Term};
use std::fmt::Write as _;

/// The registered terms (the list is `terms::REGISTRY`, beside the term files).
pub fn registry() -> &'static [TermInfo] {
    terms::REGISTRY
}

/// Look up a term by its TOML name.
pub fn find(name: &str) -> Option<&'static TermInfo> {
    registry().iter().find(|t| t.name == name)
}

/// What the registry knows about one term.
#[derive(Clone, Copy, Debug)]
pub struct TermInfo {
    /// The TOML table name: `[reward.<name>]`.
    pub name: &'static str,
    /// One-line meaning.
    pub meaning: &'static str,
    /// The sign convention of the unweighted value.
    pub sign: &'static str,
    /// Why a negative weight is allowed for this term; `None` means the weight must be >= 0.
    pub negative_weight: Option<&'static str>,
    /// Parameters besides `weight` (which every term has, default 1).
    pub params: &'static [ParamInfo],
    /// Build the term from checked parameters (every parameter present, defaults filled in).
    pub build: fn(&Params) -> Box<dyn Term>,
}

impl PartialEq for TermInfo {
    /// Terms are identified by their registry name.
    fn eq(&self, other: &Self) -> bool {
        self.name == other.name
    }
}

/// One parameter of a term.
#[derive(Clone, Copy, Debug)]
pub struct ParamInfo {
    pub name: &'static str,
    pub kind: ParamKind,
    pub default: ParamValue,
    /// Unit, or "" for none.
    pub unit: &'static str,
    /// One-line meaning.
    pub meaning: &'static str,
}

/// The type and allowed range of a parameter.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum ParamKind {
    /// A finite number >= 0 (a magnitude; the term supplies the sign).
    Magnitude,
    /// A finite number > 0.
    Positive,
    /// true or false.
    Flag,
    /// One of a fixed set of strings.
    Choice(&'static [&'static str]),
}

/// A parameter value.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum ParamValue {
    Number(f64),
    Flag(bool),
    Choice(&'static str),
}

impl std::fmt::Display for ParamValue {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ParamValue::Number(x) => write!(f, "{x}"),
            ParamValue::Flag(b) => write!(f, "{b}"),
            ParamValue::Choice(s) => write!(f, "\"{s}\""),
        }
    }
}

impl ParamKind {
    /// Short description of the allowed values.
    pub fn allowed(&self) -> String {
        match self {
            ParamKind::Magnitude => ">= 0".into(),
            ParamKind::Positive => "> 0".into(),
            ParamKind::Flag => "true|false".into(),
            ParamKind::Choice(c) => c.join("|"),
        }
    }
}

/// Checked parameter values of one term (every registered parameter present).
#[derive(Clone, Debug, PartialEq)]
pub struct Params {
    pub(crate) values: Vec<(&'static str, ParamValue)>,
}

impl Params {
    /// The defaults of a registered term.
    pub fn defaults(info: &TermInfo) -> Params {
        Params {
            values: info.params.iter().map(|p| (p.name, p.default)).collect(),
        }
    }

    fn get(&self, name: &str) -> ParamValue {
        self.values
            .iter()
            .find(|(n, _)| *n == name)
            .map(|(_, v)| *v)
            .unwrap_or_else(|| panic!("reward parameter `{name}` is not registered for this term"))
    }

    /// A number parameter. Panics if `name` is not a registered number parameter (a programming error).
    pub fn number(&self, name: &str) -> f64 {
        match self.get(name) {
            ParamValue::Number(x) => x,
            v => panic!("reward parameter `{name}` is {v}, not a number"),
        }
    }

    /// A flag parameter. Panics if `name` is not a registered flag.
    pub fn flag(&self, name: &str) -> bool {
        match self.get(name) {
            ParamValue::Flag(b) => b,
            v => panic!("reward parameter `{name}` is {v}, not a flag"),
        }
    }

    /// A choice parameter. Panics if `name` is not a registered choice.
    pub fn choice(&self, name: &str) -> &'static str {
        match self.get(name) {
            ParamValue::Choice(s) => s,
            v => panic!("reward parameter `{name}` is {v}, not a choice"),
        }
    }

    /// Set a value (used by the table reader after checking it).
    pub(crate) fn set(&mut self, name: &'static str, v: ParamValue) {
        if let Some(slot) = self.values.iter_mut().find(|(n, _)| *n == name) {
            slot.1 = v;
        }
    }

    /// All (name, value) pairs in registry order.
    pub fn iter(&self) -> impl Iterator<Item = (&'static str, ParamValue)> + '_ {
        self.values.iter().copied()
    }
}

/// The text printed by `termwise terms`: every registered term with its meaning, sign convention and
/// parameters (with defaults, allowed values, units), read from the registry.
pub fn describe_terms() -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "Reward terms. Turn one on with a [reward.<name>] table in the experiment file; a term that is\n\
         absent or has weight = 0 is off. Weights are multipliers >= 0 (unless stated) and each term\n\
         states its own sign. The reward of a step is the sum of weight * value over the enabled terms.\n"
    );
    for t in registry() {
        let _ = writeln!(s, "[reward.{}]  {}", t.name, t.meaning);
        let _ = writeln!(s, "  sign: {}", t.sign);
        let _ = writeln!(
            s,
            "  {:<14} {:<18} {:<22} meaning [unit]",
            "parameter", "default", "allowed"
        );
        let w = match t.negative_weight {
            None => ">= 0".to_string(),
            Some(_) => "any".to_string(),
        };
        let wnote = match t.negative_weight {
            None => "multiplier of the term".to_string(),
            Some(why) => format!("multiplier of the term ({why})"),
        };
        let _ = writeln!(s, "  {:<14} {:<18} {:<22} {}", "weight", "1", w, wnote);
        for p in t.params {
            let unit = if p.unit.is_empty() {
                String::new()
            } else {
                format!(" [{}]", p.unit)
            };
            let _ = writeln!(
                s,
                "  {:<14} {:<18} {:<22} {}{}",
                p.name,
                p.default.to_string(),
                p.kind.allowed(),
                p.meaning,
                unit
            );
        }
        let _ = writeln!(s);
    }
    let _ = writeln!(
        s,
        "\nEnding episodes on contact: with a per-step cost (time, distance) an episode that ends at its first\n\
         contact stops paying that cost, so a policy can earn more by crashing early than by trying to reach the\n\
         goal. Either keep episodes going on contact ([reward.collision] terminate = false, with a penalty per step\n\
         in contact), or charge the forgone steps: remaining_cost = the time cost makes a crash cost at least as\n\
         much as using the whole horizon. The report flags variants whose return rises while clean success falls."
    );
    s
}
