//! Reading the experiment's `[reward]` table into a checked `RewardSpec`: known term names only (with the
//! nearest known name suggested), known parameters only, types and ranges checked, NaN rejected, every
//! error naming its key path `reward.<term>.<param>`.

use super::registry::{self, ParamKind, ParamValue, Params, TermInfo};
use crate::config::ConfigError;

/// Largest magnitude of a reward weight or numeric reward parameter: larger values only overflow the
/// learner's f32 arithmetic (rewards, returns and losses) without changing what the study compares.
pub const MAX_MAGNITUDE: f64 = 1e6;

/// One term as configured (present in the table).
#[derive(Clone, Debug, PartialEq)]
pub struct TermSetting {
    /// The registry entry.
    pub info: &'static TermInfo,
    /// Multiplier of the term (0 = off).
    pub weight: f64,
    /// Checked parameters, defaults filled in.
    pub params: Params,
}

/// A checked reward configuration: the terms present in `[reward]`, in registry order.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct RewardSpec {
    /// Every term whose table is present, including those with weight 0.
    pub present: Vec<TermSetting>,
}

impl RewardSpec {
    /// Read the experiment's `[reward]` table. `origin` names the file and `src` is its text (for line
    /// numbers); errors name `reward.<term>.<param>`.
    pub fn from_table(
        table: &toml::Table,
        origin: &str,
        src: &str,
    ) -> Result<RewardSpec, ConfigError> {
        let err = |path: &str, msg: String| ConfigError::at(origin, src, path, msg);
        for (name, _) in table.iter() {
            if registry::find(name).is_none() {
                return Err(err(
                    &format!("reward.{name}"),
                    unknown_message(
                        "reward term",
                        name,
                        registry::registry().iter().map(|t| t.name),
                    ),
                ));
            }
        }
        let mut present = Vec::new();
        for info in registry::registry() {
            let Some(v) = table.get(info.name) else {
                continue;
            };
            let base = format!("reward.{}", info.name);
            let Some(t) = v.as_table() else {
                return Err(err(
                    &base,
                    format!(
                        "must be a table of parameters ([{base}] with weight = ...), got {}",
                        v.type_str()
                    ),
                ));
            };
            present.push(read_term(info, t, &base, origin, src)?);
        }
        Ok(RewardSpec { present })
    }

    /// Parse a TOML document holding a `[reward]` table (a convenience for tests and tools).
    pub fn from_toml_str(src: &str, origin: &str) -> Result<RewardSpec, ConfigError> {
        let doc: toml::Table = src.parse().map_err(|e: toml::de::Error| ConfigError {
            origin: origin.into(),
            line: e
                .span()
                .map(|s| src[..s.start.min(src.len())].matches('\n').count() + 1),
            path: String::new(),
            message: e.message().trim().replace('\n', " "),
        })?;
        match doc.get("reward") {
            None => Ok(RewardSpec::default()),
            Some(toml::Value::Table(t)) => RewardSpec::from_table(t, origin, src),
            Some(v) => Err(ConfigError::at(
                origin,
                src,
                "reward",
                format!("must be a table, got {}", v.type_str()),
            )),
        }
    }

    /// The enabled terms (present with weight != 0), in registry order.
    pub fn enabled(&self) -> impl Iterator<Item = &TermSetting> {
        self.present.iter().filter(|t| t.weight != 0.0)
    }

    /// Names of the enabled terms, in the order `Composer::terms` reports them.
    pub fn term_names(&self) -> Vec<&'static str> {
        self.enabled().map(|t| t.info.name).collect()
    }
}

fn read_term(
    info: &'static TermInfo,
    t: &toml::Table,
    base: &str,
    origin: &str,
    src: &str,
) -> Result<TermSetting, ConfigError> {
    let err = |path: &str, msg: String| ConfigError::at(origin, src, path, msg);
    let mut params = Params::defaults(info);
    let mut weight = 1.0;
    for (key, v) in t.iter() {
        let path = format!("{base}.{key}");
        if key == "weight" {
            let w = number(v, &path, origin, src)?;
            if w < 0.0 && info.negative_weight.is_none() {
                return Err(err(
                    &path,
                    format!(
                        "must be >= 0, got {w}: weights are multipliers and `{}` already carries its sign \
                         ({}); set the weight to 0 to turn the term off",
                        info.name, info.sign
                    ),
                ));
            }
            weight = w;
            continue;
        }
        let Some(p) = info.params.iter().find(|p| p.name == key) else {
            let names = std::iter::once("weight").chain(info.params.iter().map(|p| p.name));
            return Err(err(
                &path,
                unknown_message(&format!("parameter of `{}`", info.name), key, names),
            ));
        };
        let value = match p.kind {
            ParamKind::Magnitude | ParamKind::Positive => {
                let x = number(v, &path, origin, src)?;
                if p.kind == ParamKind::Magnitude && x < 0.0 {
                    return Err(err(
                        &path,
                        format!(
                            "must be >= 0, got {x}: it is a magnitude and `{}` applies the sign itself ({})",
                            info.name, info.sign
                        ),
                    ));
                }
                if p.kind == ParamKind::Positive && x <= 0.0 {
                    return Err(err(&path, format!("must be > 0, got {x}")));
                }
                ParamValue::Number(x)
            }
            ParamKind::Flag => match v.as_bool() {
                Some(b) => ParamValue::Flag(b),
                None => {
                    return Err(err(
                        &path,
                        format!("must be true or false, got {}", v.type_str()),
                    ))
                }
            },
            ParamKind::Choice(choices) => {
                let s = v.as_str().ok_or_else(|| {
                    err(
                        &path,
                        format!("must be one of {}, got {}", quoted(choices), v.type_str()),
                    )
                })?;
                match choices.iter().find(|c| **c == s) {
                    Some(c) => ParamValue::Choice(c),
                    None => {
                        return Err(err(
                            &path,
                            unknown_message("value", s, choices.iter().copied()),
                        ))
                    }
                }
            }
        };
        params.set(p.name, value);
    }
    Ok(TermSetting {
        info,
        weight,
        params,
    })
}

/// A finite number (TOML float or integer).
fn number(v: &toml::Value, path: &str, origin: &str, src: &str) -> Result<f64, ConfigError> {
    let x = match v {
        toml::Value::Float(x) => *x,
        toml::Value::Integer(i) => *i as f64,
        other => {
            return Err(ConfigError::at(
                origin,
                src,
                path,
                format!("must be a number, got {}", other.type_str()),
            ))
        }
    };
    let x = crate::config::finite(origin, src, path, x)?;
    if x.abs() > MAX_MAGNITUDE {
        return Err(ConfigError::at(
            origin,
            src,
            path,
            format!("must be within +-{MAX_MAGNITUDE:e}, got {x:e}"),
        ));
    }
    Ok(x)
}

fn quoted(items: &[&str]) -> String {
    items
        .iter()
        .map(|s| format!("\"{s}\""))
        .collect::<Vec<_>>()
        .join(", ")
}

/// "unknown <what> `x`; did you mean `y`? known: a, b, c".
fn unknown_message<'a>(what: &str, got: &str, known: impl Iterator<Item = &'a str>) -> String {
    let known: Vec<&str> = known.collect();
    let mut m = format!("unknown {what} `{got}`");
    if let Some(near) = nearest(got, &known) {
        m.push_str(&format!("; did you mean `{near}`?"));
    }
    m.push_str(&format!(" known: {}", known.join(", ")));
    m
}

/// The known name closest to `got` by edit distance, if it is close enough to be a likely typo
/// (at most 2 edits, or a third of the length for long names).
pub(crate) fn nearest<'a>(got: &str, known: &[&'a str]) -> Option<&'a str> {
    let limit = (got.chars().count() / 3).max(2);
    known
        .iter()
        .map(|k| (levenshtein(got, k), *k))
        .filter(|(d, _)| *d <= limit)
        .min_by_key(|(d, _)| *d)
        .map(|(_, k)| k)
}

/// Levenshtein edit distance (insertions, deletions, substitutions; Levenshtein 1966), two-row dynamic
/// programme.
pub(crate) fn levenshtein(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().collect();
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    let mut cur = vec![0; b.len() + 1];
    for i in 1..=a.len() {
        cur[0] = i;
        for j in 1..=b.len() {
            let sub = prev[j - 1] + usize::from(a[i - 1] != b[j - 1]);
            cur[j] = sub.min(prev[j] + 1).min(cur[j - 1] + 1);
        }
        std::mem::swap(&mut prev, &mut cur);
    }
    prev[b.len()]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn edit_distance_textbook_values() {
        // Classic examples: kitten -> sitting = 3, flaw -> lawn = 2 (Levenshtein distance; e.g. Wikipedia's
        // "Levenshtein distance" article, from memory), identical = 0, empty -> n.
        assert_eq!(levenshtein("kitten", "sitting"), 3);
        assert_eq!(levenshtein("flaw", "lawn"), 2);
        assert_eq!(levenshtein("goal", "goal"), 0);
        assert_eq!(levenshtein("", "time"), 4);
        assert_eq!(
            nearest("colision", &["goal", "collision"]),
            Some("collision")
        );
        assert_eq!(nearest("xyzzy", &["goal", "collision"]), None);
    }
}
