//! Reading TOML files into typed configs with one-line errors that name the file, the key path and the
//! line, as every termwise command promises (`file:line: key.path: what is wrong and what is allowed`).

use serde::de::DeserializeOwned;
use std::fmt;
use std::path::Path;

/// One problem with a config file. Displays on one line.
#[derive(Debug, Clone, PartialEq)]
pub struct ConfigError {
    /// The file (or a label for inline text).
    pub origin: String,
    /// 1-based line, when known.
    pub line: Option<usize>,
    /// Dotted key path, e.g. `arm.link[1].mass` (empty for whole-file problems).
    pub path: String,
    /// What is wrong and what is allowed.
    pub message: String,
}

impl fmt::Display for ConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.origin)?;
        if let Some(l) = self.line {
            write!(f, ":{l}")?;
        }
        if !self.path.is_empty() {
            write!(f, ": {}", self.path)?;
        }
        write!(f, ": {}", self.message.replace('\n', " "))
    }
}

impl std::error::Error for ConfigError {}

impl ConfigError {
    /// A semantic error at `path`; the line is looked up in `src` when possible.
    pub fn at(origin: &str, src: &str, path: &str, message: impl Into<String>) -> ConfigError {
        ConfigError {
            origin: origin.to_string(),
            line: locate_line(src, path),
            path: path.to_string(),
            message: message.into(),
        }
    }
}

/// Read a file to a string, mapping I/O failures to a `ConfigError`.
pub fn read_file(path: &Path) -> Result<String, ConfigError> {
    std::fs::read_to_string(path).map_err(|e| ConfigError {
        origin: path.display().to_string(),
        line: None,
        path: String::new(),
        message: format!("cannot read file: {e}"),
    })
}

/// Parse TOML text into `T`, reporting the key path and line of the first problem.
pub fn parse_toml<T: DeserializeOwned>(src: &str, origin: &str) -> Result<T, ConfigError> {
    let de = toml::de::Deserializer::parse(src)
        .map_err(|e| toml_error(src, origin, String::new(), &e))?;
    serde_path_to_error::deserialize(de).map_err(|e| {
        let path = e.path().to_string();
        let path = if path == "." { String::new() } else { path };
        toml_error(src, origin, path, e.inner())
    })
}

fn toml_error(src: &str, origin: &str, path: String, e: &toml::de::Error) -> ConfigError {
    let line = e
        .span()
        .map(|s| src[..s.start.min(src.len())].matches('\n').count() + 1)
        .or_else(|| locate_line(src, &path));
    ConfigError {
        origin: origin.to_string(),
        line,
        path,
        message: plain_words(&e.message().trim().replace('\n', " ")),
    }
}

/// Serde's type names in plain words: "invalid type: string \"x\", expected i64" becomes
/// "wrong type: found string \"x\", expected a whole number".
pub fn plain_words(message: &str) -> String {
    let mut m = message.replace("invalid type: ", "wrong type: found ");
    for (rust, words) in [
        ("i64", "a whole number"),
        ("i32", "a whole number"),
        ("u64", "a whole number >= 0"),
        ("u32", "a whole number >= 0"),
        ("usize", "a whole number >= 0"),
        ("f64", "a number"),
        ("f32", "a number"),
    ] {
        m = m.replace(&format!("expected {rust}"), &format!("expected {words}"));
    }
    m
}

/// Best-effort line of a dotted key path such as `arm.link[1].mass` in TOML text: walks table headers
/// (`[arm]`, `[[arm.link]]`, counting array entries) and then looks for the final key.
pub fn locate_line(src: &str, path: &str) -> Option<usize> {
    if path.is_empty() {
        return None;
    }
    // Split "a.b[2].c" into ("a", None), ("b", Some(2)), ("c", None).
    let mut parts: Vec<(String, Option<usize>)> = Vec::new();
    for seg in path.split('.') {
        if let Some((name, rest)) = seg.split_once('[') {
            let idx = rest.trim_end_matches(']').parse().ok();
            parts.push((name.to_string(), idx));
        } else {
            parts.push((seg.to_string(), None));
        }
    }
    let lines: Vec<&str> = src.lines().collect();
    // Find the deepest table header matching a prefix of the path.
    let mut start = 0usize;
    let mut consumed = 0usize;
    for depth in (1..=parts.len()).rev() {
        let prefix: Vec<&str> = parts[..depth].iter().map(|(n, _)| n.as_str()).collect();
        let header = prefix.join(".");
        let want = parts[depth - 1].1;
        let mut seen = 0usize;
        let mut found = None;
        for (i, l) in lines.iter().enumerate() {
            let t = l.trim();
            let is_arr = t.starts_with("[[")
                && t.trim_start_matches("[[").trim_end_matches("]]").trim() == header;
            let is_tab = !t.starts_with("[[")
                && t.starts_with('[')
                && t.trim_start_matches('[').trim_end_matches(']').trim() == header;
            if is_arr {
                if Some(seen) == want || want.is_none() {
                    found = Some(i);
                    break;
                }
                seen += 1;
            } else if is_tab && want.is_none() {
                found = Some(i);
                break;
            }
        }
        if let Some(i) = found {
            start = i;
            consumed = depth;
            break;
        }
    }
    if consumed == parts.len() {
        return Some(start + 1);
    }
    let key = &parts[consumed].0;
    for (i, l) in lines.iter().enumerate().skip(start) {
        let t = l.trim_start();
        if i > start && consumed > 0 && t.starts_with('[') {
            break;
        }
        if let Some(rest) = t.strip_prefix(key.as_str()) {
            let rest = rest.trim_start();
            if rest.starts_with('=') || rest.starts_with('.') {
                return Some(i + 1);
            }
        }
    }
    if consumed > 0 {
        Some(start + 1)
    } else {
        None
    }
}

/// A number as an error message shows it: scientific notation when very large or very small, so a 1e300
/// stays short.
pub fn num(x: f64) -> String {
    if x.is_finite() && x != 0.0 && !(1e-4..1e6).contains(&x.abs()) {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}

/// Check that a number is finite, naming the key when it is not.
pub fn finite(origin: &str, src: &str, path: &str, v: f64) -> Result<f64, ConfigError> {
    if v.is_finite() {
        Ok(v)
    } else {
        Err(ConfigError::at(
            origin,
            src,
            path,
            format!("must be a finite number, got {}", num(v)),
        ))
    }
}

/// Check that a number is finite and > 0.
pub fn positive(origin: &str, src: &str, path: &str, v: f64) -> Result<f64, ConfigError> {
    if v.is_finite() && v > 0.0 {
        Ok(v)
    } else {
        Err(ConfigError::at(
            origin,
            src,
            path,
            format!("must be a finite number > 0, got {}", num(v)),
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(serde::Deserialize, Debug)]
    #[serde(deny_unknown_fields)]
    #[allow(dead_code)]
    struct Doc {
        a: Inner,
        #[serde(default)]
        item: Vec<Item>,
    }
    #[derive(serde::Deserialize, Debug)]
    #[serde(deny_unknown_fields)]
    #[allow(dead_code)]
    struct Inner {
        x: f64,
    }
    #[derive(serde::Deserialize, Debug)]
    #[serde(deny_unknown_fields)]
    #[allow(dead_code)]
    struct Item {
        v: f64,
    }

    #[test]
    fn unknown_key_names_path_and_line() {
        let src = "[a]\nx = 1.0\n\n[[item]]\nv = 1\n\n[[item]]\nw = 2\n";
        let e = parse_toml::<Doc>(src, "f.toml").unwrap_err();
        assert_eq!(e.line, Some(8), "{e}");
        assert!(e.path.starts_with("item[1]"), "{e}");
        assert!(e.to_string().contains("unknown field"), "{e}");
        assert!(!e.to_string().contains('\n'));
    }

    #[test]
    fn type_errors_are_in_plain_words() {
        #[derive(Debug, serde::Deserialize)]
        #[allow(dead_code)]
        struct T {
            seeds: i64,
            rate: f64,
        }
        let e = parse_toml::<T>("seeds = \"five\"\nrate = 0.5\n", "x.toml").unwrap_err();
        assert!(
            e.message.contains("expected a whole number"),
            "{}",
            e.message
        );
        assert!(!e.message.contains("i64"), "{}", e.message);
        let e = parse_toml::<T>("seeds = 5\nrate = true\n", "x.toml").unwrap_err();
        assert!(e.message.contains("expected a number"), "{}", e.message);
    }

    #[test]
    fn missing_key_is_reported() {
        let e = parse_toml::<Doc>("[a]\n", "f.toml").unwrap_err();
        assert!(e.to_string().contains("missing field `x`"), "{e}");
    }

    #[test]
    fn numbers_in_messages_stay_short() {
        assert_eq!(num(1e300), "1e300");
        assert_eq!(num(-2.5e-7), "-2.5e-7");
        assert_eq!(num(0.3), "0.3");
        assert_eq!(num(0.0), "0");
        assert_eq!(num(f64::NAN), "NaN");
    }

    #[test]
    fn locate_line_walks_array_tables() {
        let src = "[arm]\ncontrol = \"torque\"\n[[arm.link]]\nlength = 1\n[[arm.link]]\nlength = 2\nmass = 3\n";
        assert_eq!(locate_line(src, "arm.link[1].mass"), Some(7));
        assert_eq!(locate_line(src, "arm.control"), Some(2));
        assert_eq!(locate_line(src, "arm.link[0].length"), Some(4));
    }
}
