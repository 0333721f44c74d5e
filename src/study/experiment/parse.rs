//! Reading an experiment file: the raw schema, then expansion of the base, the declared variants and the
//! generated ones (leave-one-out, one-only, grid) into validated variants.

use super::*;

/// The raw file: study settings, the base sections, generators and variants.
#[derive(Deserialize, Debug)]
#[serde(deny_unknown_fields)]
pub(super) struct RawExperiment {
    study: StudySettings,
    scenario: Table,
    #[serde(default)]
    plan: Option<Table>,
    reward: Table,
    #[serde(default)]
    curriculum: Option<Table>,
    #[serde(default)]
    learner: Option<Table>,
    #[serde(default)]
    observation: Option<Table>,
    #[serde(default)]
    baseline: Option<Table>,
    #[serde(default)]
    waypoints: Option<Table>,
    #[serde(default)]
    generate: Option<GenerateSpec>,
    #[serde(default)]
    variant: Vec<Table>,
    #[serde(default)]
    probe: Vec<probe::RawProbe>,
}

/// Read and validate an experiment file.
pub fn load(path: &Path) -> Result<Experiment, ConfigError> {
    let src = crate::config::read_file(path)?;
    parse(&src, path)
}

/// Parse and validate experiment text; `path` locates `scenario.file` and names the file in errors.
#[allow(clippy::type_complexity)]
pub fn parse(src: &str, path: &Path) -> Result<Experiment, ConfigError> {
    let origin = path.display().to_string();
    let o = origin.as_str();
    let raw: RawExperiment = parse_toml(src, o)?;
    let err = |p: &str, m: String| ConfigError::at(o, src, p, m);
    let st = &raw.study;
    if !safe_name(&st.name) {
        return Err(err(
            "study.name",
            format!(
                "`{}` is not safe as a folder name; use letters, digits, -, _ or .",
                st.name
            ),
        ));
    }
    if st.seeds < 1 || st.seeds > MAX_SEEDS {
        return Err(err(
            "study.seeds",
            format!("needs 1 to {MAX_SEEDS} seeds, got {}", st.seeds),
        ));
    }
    if st.budget < 1 || st.budget > MAX_BUDGET {
        return Err(err(
            "study.budget",
            format!(
                "must be a number of environment steps in 1..={MAX_BUDGET}, got {}",
                st.budget
            ),
        ));
    }
    if let Some(e) = st.eval_every {
        if e < 1 || e > st.budget {
            return Err(err(
                "study.eval_every",
                format!("must be in 1..=budget ({}), got {e}", st.budget),
            ));
        }
        if st.budget / e >= MAX_EVALUATIONS {
            return Err(err(
                "study.eval_every",
                format!(
                    "{e} steps gives {} evaluations per run; at most {MAX_EVALUATIONS} are allowed \
                     (eval_every >= budget / {MAX_EVALUATIONS})",
                    st.budget / e + 1
                ),
            ));
        }
    }
    if st.eval_episodes < 1 || st.eval_episodes > MAX_EVAL_EPISODES {
        return Err(err(
            "study.eval_episodes",
            format!(
                "must be in 1..={MAX_EVAL_EPISODES}, got {}",
                st.eval_episodes
            ),
        ));
    }
    if !(0.0..=1.0).contains(&st.success_threshold) {
        return Err(err(
            "study.success_threshold",
            format!("must be in [0, 1], got {}", st.success_threshold),
        ));
    }
    if st.final_window < 1 || st.final_window > MAX_EVALUATIONS {
        return Err(err(
            "study.final_window",
            format!(
                "must be in 1..={MAX_EVALUATIONS} evaluations, got {}",
                st.final_window
            ),
        ));
    }

    // The base table: the scenario file (if any) with inline scenario keys merged over it.
    let mut base = Table::new();
    let mut scenario = Table::new();
    let mut inline = raw.scenario.clone();
    if let Some(file) = inline.remove("file") {
        let rel = file
            .as_str()
            .ok_or_else(|| err("scenario.file", "must be a path string".into()))?;
        let p = path.parent().unwrap_or(Path::new(".")).join(rel);
        let text = std::fs::read_to_string(&p).map_err(|e| {
            err(
                "scenario.file",
                format!("cannot read scenario file {}: {e}", p.display()),
            )
        })?;
        scenario = parse_toml::<Table>(&text, &p.display().to_string())?;
        // Validate the file on its own so its errors name its own lines.
        Scenario::from_toml_str(&text, &p.display().to_string())?;
    }
    deep_merge(&mut scenario, &inline);
    base.insert("scenario".into(), Value::Table(scenario));
    let sections: [(&str, &Option<Table>); 5] = [
        ("plan", &raw.plan),
        ("curriculum", &raw.curriculum),
        ("learner", &raw.learner),
        ("observation", &raw.observation),
        ("baseline", &raw.baseline),
    ];
    for (k, v) in sections {
        base.insert(k.into(), Value::Table(v.clone().unwrap_or_default()));
    }
    base.insert("reward".into(), Value::Table(raw.reward.clone()));
    // Only when given: a base without it keeps the merged text (and so the run hashes) it had before the
    // section existed.
    if let Some(w) = &raw.waypoints {
        base.insert("waypoints".into(), Value::Table(w.clone()));
    }

    // Variant override tables, explicit then generated.
    let mut overrides: Vec<Override> = Vec::new();
    for (i, v) in raw.variant.iter().enumerate() {
        let mut v = v.clone();
        let name = match v.remove("name") {
            Some(Value::String(s)) => s,
            _ => {
                return Err(err(
                    &format!("variant[{i}].name"),
                    "every [[variant]] needs a `name` string".into(),
                ))
            }
        };
        for k in v.keys() {
            if k != "kind" && !VARIANT_SECTIONS.contains(&k.as_str()) {
                return Err(err(
                    &format!("variant[{i}].{k}"),
                    format!("a variant may set `name`, `kind` and override {}; `{k}` is not one of them", VARIANT_SECTIONS.join(", ")),
                ));
            }
        }
        overrides.push((name, v, format!("variant[{i}]"), None));
    }
    if let Some(g) = &raw.generate {
        let known_terms: Vec<String> = raw.reward.keys().cloned().collect();
        for (list, kind) in [
            (&g.leave_one_out, "leave_one_out"),
            (&g.one_only, "one_only"),
        ] {
            for (j, t) in list.iter().enumerate() {
                if !known_terms.contains(t) {
                    return Err(err(
                        &format!("generate.{kind}[{j}]"),
                        format!(
                            "`{t}` is not a term of the base [reward] table (terms: {})",
                            known_terms.join(", ")
                        ),
                    ));
                }
            }
        }
        for t in &g.leave_one_out {
            let mut o = Table::new();
            set_dotted(&mut o, &format!("reward.{t}.weight"), Value::Float(0.0));
            overrides.push((
                format!("without-{t}"),
                o,
                "generate.leave_one_out".into(),
                None,
            ));
        }
        for t in &g.one_only {
            let mut o = Table::new();
            for other in known_terms.iter().filter(|x| *x != t) {
                set_dotted(&mut o, &format!("reward.{other}.weight"), Value::Float(0.0));
            }
            overrides.push((format!("only-{t}"), o, "generate.one_only".into(), None));
        }
        if !g.grid.is_empty() {
            let keys: Vec<&String> = g.grid.keys().collect();
            for k in &keys {
                if g.grid[*k].is_empty() {
                    return Err(err(
                        &format!("generate.grid.{k}"),
                        "needs at least one value".into(),
                    ));
                }
                let top = k.split('.').next().unwrap_or("");
                if !VARIANT_SECTIONS.contains(&top) {
                    return Err(err(
                        &format!("generate.grid.{k}"),
                        format!(
                            "grid keys must start with one of {}",
                            VARIANT_SECTIONS.join(", ")
                        ),
                    ));
                }
            }
            let total = keys
                .iter()
                .try_fold(1usize, |acc, k| acc.checked_mul(g.grid[*k].len()))
                .filter(|t| *t <= MAX_VARIANTS)
                .ok_or_else(|| {
                    err(
                        "generate.grid",
                        format!("makes more than {MAX_VARIANTS} variants (the product of the list lengths)"),
                    )
                })?;
            for combo in 0..total {
                // Decode `combo` in mixed radix, the last key varying fastest.
                let mut rest = combo;
                let mut idx = vec![0usize; keys.len()];
                for ki in (0..keys.len()).rev() {
                    let len = g.grid[keys[ki]].len();
                    idx[ki] = rest % len;
                    rest /= len;
                }
                let mut o = Table::new();
                let mut coords = BTreeMap::new();
                let mut parts = Vec::new();
                for (ki, k) in keys.iter().enumerate() {
                    let v = g.grid[*k][idx[ki]];
                    set_dotted(&mut o, k, Value::Float(v));
                    coords.insert((*k).clone(), v);
                    let short = k.trim_start_matches("reward.").trim_end_matches(".weight");
                    parts.push(format!("{short}={}", fmt_num(v)));
                }
                overrides.push((
                    format!("grid-{}", parts.join("_")),
                    o,
                    "generate.grid".into(),
                    Some(coords),
                ));
            }
        }
    }
    if overrides.is_empty() {
        overrides.push(("base".into(), Table::new(), "base".into(), None));
    }

    if overrides.len() > MAX_VARIANTS {
        return Err(err(
            "variant",
            format!(
                "{} variants (explicit and generated); at most {MAX_VARIANTS} are allowed",
                overrides.len()
            ),
        ));
    }
    let mut variants: Vec<VariantSpec> = Vec::new();
    for (name, over, where_, grid) in overrides {
        if !safe_name(&name) {
            return Err(err(&format!("{where_}.name"), format!("variant name `{name}` is not safe as a folder name; use letters, digits, -, _, . or =")));
        }
        if variants.iter().any(|v| v.name == name) {
            return Err(err(
                &format!("{where_}.name"),
                format!("duplicate variant name `{name}`"),
            ));
        }
        let mut merged = base.clone();
        let mut over = over;
        let kind = match over.remove("kind") {
            None => VariantKind::Learned,
            Some(Value::String(s)) if s == "learned" => VariantKind::Learned,
            Some(Value::String(s)) if s == "baseline" => VariantKind::Baseline,
            Some(v) => {
                return Err(err(
                    &format!("{where_}.kind"),
                    format!("must be \"learned\" or \"baseline\", got {v}"),
                ))
            }
        };
        deep_merge(&mut merged, &over);
        let changes = diff(&base, &merged);
        let spec = validate_variant(&name, kind, &merged, o, src, &where_, &over)?;
        variants.push(VariantSpec {
            changes,
            grid,
            ..spec
        });
    }
    if let Some(r) = &st.reference {
        if !variants.iter().any(|v| &v.name == r) {
            let names: Vec<_> = variants.iter().map(|v| v.name.as_str()).collect();
            return Err(err(
                "study.reference",
                format!("no variant named `{r}`; variants: {}", names.join(", ")),
            ));
        }
    }
    let runs: i64 = variants
        .iter()
        .map(|v| match v.kind {
            VariantKind::Baseline => 1,
            VariantKind::Learned => st.seeds,
        })
        .sum();
    if runs > MAX_RUNS {
        return Err(err(
            "study.seeds",
            format!(
                "{} variants and {} seeds make {runs} runs; at most {MAX_RUNS} are allowed",
                variants.len(),
                st.seeds
            ),
        ));
    }
    for v in &variants {
        let rollout = (v.learner.num_envs * v.learner.rollout_steps) as i64;
        if v.kind == VariantKind::Learned && st.budget < rollout {
            return Err(err(
                "study.budget",
                format!("{} steps is smaller than one rollout of variant `{}` ({} envs x {} steps = {rollout})", st.budget, v.name, v.learner.num_envs, v.learner.rollout_steps),
            ));
        }
    }
    let learned = variants
        .iter()
        .filter(|v| v.kind == VariantKind::Learned)
        .count();
    let racing = match &st.racing {
        Some(r) => Some(racing::validate_racing(
            r,
            st.seeds,
            learned,
            variants.len() - learned,
            o,
            src,
        )?),
        None => None,
    };
    let probes = probe::validate_probes(&raw.probe, &variants, st, o, src)?;
    Ok(Experiment {
        study: raw.study,
        variants,
        source: src.to_string(),
        path: path.to_path_buf(),
        probes,
        racing,
    })
}
