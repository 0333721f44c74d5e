//! `termwise waypoint-model`'s work: (a) the data set with its provenance, (b) training, (c) the quality report,
//! all in one folder. A rerun skips (a) when dataset.json records the same inputs and dataset.csv still has
//! the recorded hash, and (b) when model.json was trained on that data set with the same settings; (c) is always
//! redone (its timings are wall-clock).

use super::dataset::{DataSet, DataSpec};
use super::quality::{assess, Quality};
use super::train::train;
use crate::fsio::write_atomic;
use crate::plan::learned::TrainSpec;
use crate::plan::learned::{
    LearnedError, ModelFile, WaypointModel, MODEL_FORMAT, MODEL_JSON, WEIGHTS,
};
use crate::plan::PlanSpec;
use crate::sim::Scenario;
use serde::{Deserialize, Serialize};
use serde_json::json;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::Instant;

/// File names inside the output folder.
pub const DATASET_CSV: &str = "dataset.csv";
pub const DATASET_JSON: &str = "dataset.json";
pub const QUALITY_JSON: &str = "quality.json";
/// Format tag of dataset.json.
pub const DATASET_FORMAT: &str = "termwise-waypoint-data-1";
/// Salt of the held-out rows' seed: `seed XOR HOLDOUT_SALT`, a stream the data set never uses.
pub const HOLDOUT_SALT: u64 = 0x686f_6c64_2d6f_7574;

/// What to build, from where.
#[derive(Clone, Debug)]
pub struct BuildArgs {
    /// Experiment file and the FNV-1a hash of its bytes (provenance).
    pub experiment: PathBuf,
    pub experiment_hash: String,
    pub variant: String,
    /// The variant's scenario and planner settings.
    pub scenario: Arc<Scenario>,
    pub plan: PlanSpec,
    pub out: PathBuf,
    pub data: DataSpec,
    pub train: TrainSpec,
    /// Held-out rows for the quality report.
    pub holdout: usize,
    /// Assess this existing model folder instead of building one (only quality.json is written to `out`).
    pub model: Option<PathBuf>,
}

/// What the command did.
#[derive(Clone, Debug)]
pub struct BuildOutcome {
    /// Stages skipped because their inputs were unchanged.
    pub dataset_reused: bool,
    pub model_reused: bool,
    /// Data set rows and episodes, generation time (s; of this run, or as recorded when reused).
    pub rows: usize,
    pub episodes: usize,
    pub dataset_seconds: f64,
    pub training_seconds: f64,
    pub epochs: usize,
    pub best_validation_mse: f64,
    pub quality: Vec<Quality>,
}

/// dataset.json.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct DatasetFile {
    pub format: String,
    /// Everything the rows depend on; a rerun with equal inputs reuses the file.
    pub inputs: serde_json::Value,
    pub layout: crate::plan::learned::Layout,
    pub inputs_columns: Vec<String>,
    pub output_columns: Vec<String>,
    pub file: String,
    pub rows: usize,
    pub start_rows: usize,
    pub episodes: usize,
    pub redraws: usize,
    pub skipped: usize,
    pub fnv1a: String,
    pub generation_seconds: f64,
}

fn io(path: &Path) -> impl FnOnce(std::io::Error) -> LearnedError + '_ {
    move |source| LearnedError::Io {
        path: path.to_path_buf(),
        source,
    }
}

fn read_json<T: serde::de::DeserializeOwned>(path: &Path) -> Option<T> {
    serde_json::from_str(&std::fs::read_to_string(path).ok()?).ok()
}

fn hash(bytes: &[u8]) -> String {
    crate::study::experiment::fnv1a_hex(&[bytes])
}

/// Refuse a data set with fewer rows than asked for (generation gave up: draws almost never solvable).
fn check_rows(ds: &DataSet, asked: usize, what: &str) -> Result<(), LearnedError> {
    if ds.rows.len() < asked {
        return Err(LearnedError::Args(format!(
            "{what}: only {} of {asked} rows after {} episodes ({} unsolved or skipped): the draws in scenario `{}` are rarely solvable",
            ds.rows.len(),
            ds.episodes,
            ds.skipped,
            ds.layout.scenario
        )));
    }
    Ok(())
}

fn check_args(a: &BuildArgs) -> Result<(), LearnedError> {
    let bad = |m: String| Err(LearnedError::Args(m));
    let (d, t) = (&a.data, &a.train);
    if a.model.is_none() && !(2..=10_000_000).contains(&d.samples) {
        return bad(format!(
            "--samples must be in 2..=10000000, got {}",
            d.samples
        ));
    }
    if d.mid_path > 100 {
        return bad(format!(
            "--mid-path must be at most 100, got {}",
            d.mid_path
        ));
    }
    if !(d.obstacle_shift.is_finite() && (0.0..=10.0).contains(&d.obstacle_shift)) {
        return bad(format!(
            "--obstacle-shift must be a distance in [0, 10] m, got {}",
            d.obstacle_shift
        ));
    }
    if !(1..=1_000_000).contains(&a.holdout) {
        return bad(format!(
            "--holdout must be in 1..=1000000, got {}",
            a.holdout
        ));
    }
    if t.hidden
        .iter()
        .any(|&h| h == 0 || h > crate::plan::learned::network::MAX_WIDTH)
        || t.hidden.len() > 8
    {
        return bad(format!(
            "--hidden must list at most 8 widths in 1..={}, got {:?}",
            crate::plan::learned::network::MAX_WIDTH,
            t.hidden
        ));
    }
    if t.max_epochs == 0 || t.patience == 0 || t.batch == 0 {
        return bad("--epochs, --patience and --batch must be at least 1".into());
    }
    if !(t.learning_rate.is_finite() && t.learning_rate > 0.0) {
        return bad(format!(
            "--learning-rate must be > 0, got {}",
            t.learning_rate
        ));
    }
    if !(t.validation_fraction.is_finite() && (0.0..0.9).contains(&t.validation_fraction)) {
        return bad(format!(
            "--validation must be a fraction in [0, 0.9), got {}",
            t.validation_fraction
        ));
    }
    Ok(())
}

/// The data set's provenance inputs (what a rerun compares).
fn dataset_inputs(a: &BuildArgs) -> serde_json::Value {
    json!({
        "experiment": a.experiment.display().to_string(),
        "experiment_fnv1a": a.experiment_hash,
        "variant": a.variant,
        "scenario": a.scenario.name,
        "plan": serde_json::to_value(&a.plan).unwrap_or_default(),
        "data": serde_json::to_value(&a.data).unwrap_or_default(),
        "termwise_version": env!("CARGO_PKG_VERSION"),
    })
}

/// Stage (a): reuse or generate the data set. Returns (data set, its file record, reused).
fn dataset_stage(a: &BuildArgs) -> Result<(DataSet, DatasetFile, bool), LearnedError> {
    let inputs = dataset_inputs(a);
    let (csv_path, json_path) = (a.out.join(DATASET_CSV), a.out.join(DATASET_JSON));
    if let Some(old) = read_json::<DatasetFile>(&json_path) {
        if let Ok(bytes) = std::fs::read(&csv_path) {
            if old.inputs == inputs && old.format == DATASET_FORMAT && hash(&bytes) == old.fnv1a {
                let layout = crate::plan::learned::Layout::of(&a.scenario, &a.plan);
                let text = String::from_utf8_lossy(&bytes);
                if let Ok(ds) = DataSet::from_csv(&text, layout) {
                    return Ok((ds, old, true));
                }
            }
        }
    }
    let began = Instant::now();
    let ds = DataSet::generate(&a.scenario, &a.plan, &a.data);
    check_rows(&ds, a.data.samples, "data set")?;
    let csv = ds.to_csv();
    let secs = began.elapsed().as_secs_f64();
    let rec = DatasetFile {
        format: DATASET_FORMAT.into(),
        inputs,
        layout: ds.layout.clone(),
        inputs_columns: ds.layout.input_names(),
        output_columns: ds.layout.output_names(),
        file: DATASET_CSV.into(),
        rows: ds.rows.len(),
        start_rows: ds
            .rows
            .iter()
            .filter(|r| r.kind == super::dataset::RowKind::Start)
            .count(),
        episodes: ds.episodes,
        redraws: ds.redraws,
        skipped: ds.skipped,
        fnv1a: hash(csv.as_bytes()),
        generation_seconds: secs,
    };
    write_atomic(&csv_path, csv.as_bytes()).map_err(io(&csv_path))?;
    let text = serde_json::to_string_pretty(&rec).expect("dataset.json serialises");
    write_atomic(&json_path, text.as_bytes()).map_err(io(&json_path))?;
    Ok((ds, rec, false))
}

/// Stage (b): reuse or train the model. Returns (model, seconds, reused).
fn model_stage(
    a: &BuildArgs,
    ds: &DataSet,
    rec: &DatasetFile,
) -> Result<(WaypointModel, f64, bool), LearnedError> {
    let dir = &a.out;
    if let Some(old) = read_json::<ModelFile>(&dir.join(MODEL_JSON)) {
        if old.dataset_fnv1a == rec.fnv1a && old.training == a.train {
            if let Ok(m) = WaypointModel::load(dir) {
                return Ok((m, 0.0, true));
            }
        }
    }
    let began = Instant::now();
    let l = &ds.layout;
    let (x, y) = ds.matrices();
    let t = train(&x, &y, l.input_dim(), l.output_dim(), &a.train)
        .map_err(|e| LearnedError::Training(e.to_string()))?;
    let file = ModelFile {
        format: MODEL_FORMAT.into(),
        layout: l.clone(),
        inputs: l.input_names(),
        outputs: (1..l.waypoints)
            .flat_map(|k| (1..=l.joints).map(move |i| format!("w{k}_q{i}-q{i}")))
            .collect(),
        hidden: a.train.hidden.clone(),
        activation: "tanh".into(),
        weights: WEIGHTS.into(),
        scaling: t.scaling,
        training: a.train.clone(),
        summary: t.summary,
        dataset_fnv1a: rec.fnv1a.clone(),
        dataset: rec.inputs.clone(),
        termwise_version: env!("CARGO_PKG_VERSION").into(),
    };
    let wp = dir.join(WEIGHTS);
    t.net.save(&wp).map_err(io(&wp))?;
    let jp = dir.join(MODEL_JSON);
    let text = serde_json::to_string_pretty(&file).expect("model.json serialises");
    write_atomic(&jp, text.as_bytes()).map_err(io(&jp))?;
    let model = WaypointModel::new(file, t.net).map_err(LearnedError::Training)?;
    Ok((model, began.elapsed().as_secs_f64(), false))
}

/// Build (or reuse) the data set and the model in `a.out` and write quality.json there; with `a.model`, assess
/// that model on the variant instead (refused when it does not fit the variant's arm, obstacles or K).
pub fn build(a: &BuildArgs) -> Result<BuildOutcome, LearnedError> {
    check_args(a)?;
    let mut out = BuildOutcome {
        dataset_reused: false,
        model_reused: true,
        rows: 0,
        episodes: 0,
        dataset_seconds: 0.0,
        training_seconds: 0.0,
        epochs: 0,
        best_validation_mse: f64::NAN,
        quality: Vec::new(),
    };
    let model = match &a.model {
        Some(dir) => {
            let m = WaypointModel::load(dir)?;
            m.check_fits(&a.scenario, &a.plan)
                .map_err(LearnedError::Mismatch)?;
            m
        }
        None => {
            let (ds, rec, reused) = dataset_stage(a)?;
            let (m, secs, model_reused) = model_stage(a, &ds, &rec)?;
            out.dataset_reused = reused;
            out.model_reused = model_reused;
            out.rows = rec.rows;
            out.episodes = rec.episodes;
            out.dataset_seconds = rec.generation_seconds;
            out.training_seconds = secs;
            m
        }
    };
    out.epochs = model.file.summary.epochs;
    out.best_validation_mse = model.file.summary.best_validation_mse;
    let seed = a.data.seed ^ HOLDOUT_SALT;
    let spec = DataSpec {
        samples: a.holdout,
        seed,
        ..a.data.clone()
    };
    let held = DataSet::generate(&a.scenario, &a.plan, &spec);
    check_rows(&held, a.holdout, "held-out rows")?;
    let mut sets = vec![assess(
        &model,
        &held,
        &a.plan,
        &format!(
            "held-out: {} rows drawn like the data set (obstacle shift {} m), seed {seed}",
            a.holdout, spec.obstacle_shift
        ),
    )];
    if spec.obstacle_shift > 0.0 {
        let fixed = DataSpec {
            obstacle_shift: 0.0,
            ..spec.clone()
        };
        let held = DataSet::generate(&a.scenario, &a.plan, &fixed);
        check_rows(&held, a.holdout, "held-out rows")?;
        sets.push(assess(
            &model,
            &held,
            &a.plan,
            &format!(
                "held-out: {} rows with the obstacles where the scenario puts them, seed {seed}",
                a.holdout
            ),
        ));
    }
    let qj = a.out.join(QUALITY_JSON);
    let doc = json!({
        "model": a.model.as_ref().map(|p| p.display().to_string()).unwrap_or_else(|| a.out.display().to_string()),
        "experiment": a.experiment.display().to_string(),
        "variant": a.variant,
        "scenario": a.scenario.name,
        "sets": sets,
        "timing": "one core; query = WaypointModel::predict, plan = plan::plan_path with the variant's [plan] settings",
    });
    let text = serde_json::to_string_pretty(&doc).expect("quality.json serialises");
    write_atomic(&qj, text.as_bytes()).map_err(io(&qj))?;
    out.quality = sets;
    Ok(out)
}
