//! Validation of one expanded variant: each section parsed into its checked spec, errors relabelled with the
//! variant and the key's line.

use super::*;

/// True when the override table `over` sets the dotted key `path` (or a table above it).
pub(super) fn sets_key(over: &Table, path: &str) -> bool {
    let mut t = over;
    for part in path.split('.') {
        let key = part.split('[').next().unwrap_or(part);
        match t.get(key) {
            None => return false,
            Some(Value::Table(inner)) => t = inner,
            Some(_) => return true,
        }
    }
    true
}

/// Validate one merged variant table. Errors name the key as written in the base, prefixed by where the
/// override came from when the problem is in an override.
pub(super) fn validate_variant(
    name: &str,
    kind: VariantKind,
    merged: &Table,
    o: &str,
    src: &str,
    where_: &str,
    over: &Table,
) -> Result<VariantSpec, ConfigError> {
    // Blame the variant only for keys it sets itself (and point at its line); a problem in the base
    // tables is reported at the base's key, whichever variant met it first.
    let relabel = |mut e: ConfigError| {
        if where_ != "base" && sets_key(over, &e.path) {
            e.message = format!("{} (in variant `{name}`, from {where_})", e.message);
            if let Some(line) = crate::config::locate_line(src, &format!("{where_}.{}", e.path)) {
                e.line = Some(line);
            }
        }
        e
    };
    let table = |k: &str| {
        merged
            .get(k)
            .and_then(|v| v.as_table())
            .cloned()
            .unwrap_or_default()
    };
    let sc = Scenario::from_toml_value(Value::Table(table("scenario")), src, o).map_err(relabel)?;
    let typed = |k: &str| -> Result<String, ConfigError> {
        toml::to_string(&table(k)).map_err(|e| ConfigError::at(o, src, k, e.to_string()))
    };
    let sub = |k: &str, e: ConfigError| {
        let path = if e.path.is_empty() {
            k.to_string()
        } else {
            format!("{k}.{}", e.path)
        };
        relabel(ConfigError {
            line: crate::config::locate_line(src, &path),
            path,
            ..e
        })
    };
    let plan: PlanSpec = parse_toml(&typed("plan")?, o).map_err(|e| sub("plan", e))?;
    plan.validate(o, src).map_err(relabel)?;
    let curriculum: CurriculumSpec =
        parse_toml(&typed("curriculum")?, o).map_err(|e| sub("curriculum", e))?;
    curriculum.validate(o, src, "curriculum").map_err(relabel)?;
    let learner: PpoConfig = parse_toml(&typed("learner")?, o).map_err(|e| sub("learner", e))?;
    learner
        .validate()
        .map_err(|e| relabel(ConfigError::at(o, src, "learner", e.to_string())))?;
    let observation: ObservationSpec =
        parse_toml(&typed("observation")?, o).map_err(|e| sub("observation", e))?;
    let reward = RewardSpec::from_table(&table("reward"), o, src).map_err(relabel)?;
    let baseline: crate::control::BaselineSpec =
        parse_toml(&typed("baseline")?, o).map_err(|e| sub("baseline", e))?;
    baseline.validate(o, src).map_err(relabel)?;
    baseline.check_joints(sc.n(), o, src).map_err(relabel)?;
    let waypoints: crate::task::waypoints::WaypointSpec =
        parse_toml(&typed("waypoints")?, o).map_err(|e| sub("waypoints", e))?;
    let base = Path::new(o).parent().unwrap_or(Path::new("."));
    let waypoints = waypoints
        .resolve(&sc, &plan, base, o, src)
        .map_err(relabel)?;
    let merged_text =
        toml::to_string(merged).map_err(|e| ConfigError::at(o, src, "", e.to_string()))?;
    Ok(VariantSpec {
        name: name.to_string(),
        kind,
        scenario: Arc::new(sc),
        plan,
        reward,
        curriculum,
        learner,
        observation,
        baseline,
        waypoints,
        changes: Vec::new(),
        grid: None,
        merged: merged_text,
    })
}
