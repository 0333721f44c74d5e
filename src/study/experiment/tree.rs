//! TOML-tree helpers: folder-safe names, deep merge of override tables, flattening to dotted keys, the base-
//! to-variant diff and dotted-key setting.

use super::*;

/// A name usable as a folder name on every common filesystem.
pub fn safe_name(s: &str) -> bool {
    !s.is_empty()
        && s.len() <= 100
        && !s.starts_with('.')
        && s.chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.' | '='))
}

/// Deep-merge `over` into `base`: tables merge key by key, everything else replaces.
pub fn deep_merge(base: &mut Table, over: &Table) {
    for (k, v) in over {
        match (base.get_mut(k), v) {
            (Some(Value::Table(b)), Value::Table(o)) => deep_merge(b, o),
            _ => {
                base.insert(k.clone(), v.clone());
            }
        }
    }
}

/// Flatten a table to dotted keys (arrays of tables keep their index: `obstacle[1].radius`).
pub fn flatten(t: &Table, prefix: &str, out: &mut BTreeMap<String, String>) {
    for (k, v) in t {
        let key = if prefix.is_empty() {
            k.clone()
        } else {
            format!("{prefix}.{k}")
        };
        match v {
            Value::Table(sub) => flatten(sub, &key, out),
            Value::Array(a) if !a.is_empty() && a.iter().all(|x| x.is_table()) => {
                for (i, x) in a.iter().enumerate() {
                    if let Value::Table(sub) = x {
                        flatten(sub, &format!("{key}[{i}]"), out);
                    }
                }
            }
            other => {
                out.insert(key, other.to_string());
            }
        }
    }
}

pub(super) fn diff(base: &Table, merged: &Table) -> Vec<Change> {
    let (mut a, mut b) = (BTreeMap::new(), BTreeMap::new());
    flatten(base, "", &mut a);
    flatten(merged, "", &mut b);
    let mut out = Vec::new();
    for (k, v) in &b {
        match a.get(k) {
            Some(x) if x == v => {}
            x => out.push(Change {
                key: k.clone(),
                base: x.cloned().unwrap_or_else(|| "(unset)".into()),
                value: v.clone(),
            }),
        }
    }
    for (k, v) in &a {
        if !b.contains_key(k) {
            out.push(Change {
                key: k.clone(),
                base: v.clone(),
                value: "(unset)".into(),
            });
        }
    }
    out
}

/// Set a dotted key (`reward.time.weight`) in a table, creating tables on the way.
pub(super) fn set_dotted(t: &mut Table, key: &str, v: Value) {
    let mut parts = key.split('.').peekable();
    let mut cur = t;
    while let Some(p) = parts.next() {
        if parts.peek().is_none() {
            cur.insert(p.to_string(), v);
            return;
        }
        let entry = cur
            .entry(p.to_string())
            .or_insert_with(|| Value::Table(Table::new()));
        if !entry.is_table() {
            *entry = Value::Table(Table::new());
        }
        cur = entry.as_table_mut().expect("just made a table");
    }
}

pub(super) fn fmt_num(v: f64) -> String {
    let s = format!("{v}");
    s.replace('-', "m")
}

/// A variant's overrides: (name, override table, where it came from, grid coordinates).
pub(super) type Override = (String, Table, String, Option<BTreeMap<String, f64>>);
