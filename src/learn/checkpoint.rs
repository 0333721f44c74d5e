//! Checkpoints: the policy and value weights and the observation-normalisation statistics in a
//! safetensors file, plus a JSON sidecar (same stem, `.json`) with the config and network shape.
//! Both are written atomically; loading restores a policy that acts identically.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use candle_core::{Device, Tensor};
use serde::{Deserialize, Serialize};

use super::config::PpoConfig;
use super::error::LearnError;
use super::mlp::{Dense, Mlp};
use super::normalize::{ObsNormalizer, RunningMoments};
use super::policy::Policy;
use crate::fsio::write_atomic;

/// Format tag written into the sidecar.
pub const FORMAT: &str = "termwise-policy-v1";

/// The JSON sidecar beside a checkpoint.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Sidecar {
    /// Always [`FORMAT`].
    pub format: String,
    /// Observation length.
    pub obs_dim: usize,
    /// Action length.
    pub act_dim: usize,
    /// Hidden widths of both networks.
    pub hidden: Vec<usize>,
    /// The policy network outputs the log std too.
    pub state_dependent_std: bool,
    /// Clip bound of the normalised observation (None: no normalisation clip).
    pub obs_clip: Option<f32>,
    /// Observations behind the running statistics.
    pub obs_count: u64,
    /// Environment steps of training at save time.
    pub env_steps: u64,
    /// Iterations completed at save time.
    pub iteration: u64,
    /// The learner settings of the run.
    pub config: PpoConfig,
    /// What the policy was trained for (absent in checkpoints written before it was recorded).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub trained_for: Option<TrainedFor>,
}

/// What a checkpoint's policy was trained for, recorded by whoever trains it (the study runner) and
/// compared by whoever replays it. Plain strings, so `learn` needs to know nothing of tasks.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TrainedFor {
    /// Study name.
    pub study: String,
    /// Variant name.
    pub variant: String,
    /// Seed of the run.
    pub seed: u64,
    /// Config hash of the run (identifies everything that determined its results).
    pub config_hash: String,
    /// The arm the policy drives: joints, link lengths, control mode.
    pub arm: String,
    /// The observation layout, with its length.
    pub observation: String,
}

/// What a checkpoint stores (borrowed from the trainer).
pub struct CheckpointParts<'a> {
    /// The acting policy (network, log std, frozen normalisation).
    pub policy: &'a Policy,
    /// The value network.
    pub critic: &'a Mlp,
    /// Running observation statistics (for resuming).
    pub obs_stats: &'a RunningMoments,
    /// The learner settings.
    pub config: &'a PpoConfig,
    /// Environment steps so far.
    pub env_steps: u64,
    /// Iterations so far.
    pub iteration: u64,
    /// What the policy is trained for, if known.
    pub trained_for: Option<&'a TrainedFor>,
}

/// The sidecar path of a checkpoint: `policy.safetensors` -> `policy.json`.
pub fn sidecar_path(path: &Path) -> PathBuf {
    path.with_extension("json")
}

enum Data<'a> {
    F32(&'a [f32]),
    F64(&'a [f64]),
}

/// Serialise named tensors in the safetensors layout: u64 little-endian header length, a JSON
/// header mapping each name to dtype, shape and byte offsets, then the little-endian data.
fn safetensors_bytes(tensors: &[(String, Vec<usize>, Data)]) -> Vec<u8> {
    let mut header = serde_json::Map::new();
    let mut data = Vec::new();
    for (name, shape, d) in tensors {
        let start = data.len();
        let dtype = match d {
            Data::F32(x) => {
                x.iter()
                    .for_each(|v| data.extend_from_slice(&v.to_le_bytes()));
                "F32"
            }
            Data::F64(x) => {
                x.iter()
                    .for_each(|v| data.extend_from_slice(&v.to_le_bytes()));
                "F64"
            }
        };
        header.insert(
            name.clone(),
            serde_json::json!({"dtype": dtype, "shape": shape, "data_offsets": [start, data.len()]}),
        );
    }
    header.insert(
        "__metadata__".into(),
        serde_json::json!({"producer": "termwise", "format": FORMAT}),
    );
    let mut h = serde_json::to_vec(&serde_json::Value::Object(header)).expect("JSON header");
    while h.len() % 8 != 0 {
        h.push(b' ');
    }
    let mut out = Vec::with_capacity(8 + h.len() + data.len());
    out.extend_from_slice(&(h.len() as u64).to_le_bytes());
    out.extend_from_slice(&h);
    out.extend_from_slice(&data);
    out
}

fn mlp_entries<'a>(prefix: &str, m: &'a Mlp, out: &mut Vec<(String, Vec<usize>, Data<'a>)>) {
    for (i, l) in m.layers.iter().enumerate() {
        out.push((
            format!("{prefix}.{i}.weight"),
            vec![l.n_out, l.n_in],
            Data::F32(&l.w),
        ));
        out.push((format!("{prefix}.{i}.bias"), vec![l.n_out], Data::F32(&l.b)));
    }
}

/// Write the checkpoint to `path` and its sidecar to [`sidecar_path`]`(path)`, atomically.
pub fn save(path: &Path, parts: &CheckpointParts) -> Result<(), LearnError> {
    let p = parts.policy;
    let var = parts.obs_stats.variance();
    let mut entries = Vec::new();
    mlp_entries("policy", &p.actor, &mut entries);
    if !p.log_std.is_empty() {
        entries.push((
            "policy.log_std".into(),
            vec![p.act_dim],
            Data::F32(&p.log_std),
        ));
    }
    mlp_entries("value", parts.critic, &mut entries);
    let d = p.obs_dim();
    entries.push(("obs_norm.mean".into(), vec![d], Data::F32(&p.norm.mean)));
    entries.push((
        "obs_norm.inv_std".into(),
        vec![d],
        Data::F32(&p.norm.inv_std),
    ));
    entries.push((
        "obs_stats.mean".into(),
        vec![d],
        Data::F64(parts.obs_stats.mean()),
    ));
    entries.push(("obs_stats.var".into(), vec![d], Data::F64(&var)));
    let bytes = safetensors_bytes(&entries);
    let clip = p.norm.clip();
    let side = Sidecar {
        format: FORMAT.into(),
        obs_dim: d,
        act_dim: p.act_dim,
        hidden: parts.config.hidden.clone(),
        state_dependent_std: p.log_std.is_empty(),
        obs_clip: clip.is_finite().then_some(clip),
        obs_count: parts.obs_stats.count(),
        env_steps: parts.env_steps,
        iteration: parts.iteration,
        config: parts.config.clone(),
        trained_for: parts.trained_for.cloned(),
    };
    let json = serde_json::to_vec_pretty(&side).expect("sidecar serialises");
    let io = |path: &Path, source| LearnError::Io {
        path: path.to_path_buf(),
        source,
    };
    write_atomic(path, &bytes).map_err(|e| io(path, e))?;
    let sp = sidecar_path(path);
    write_atomic(&sp, &json).map_err(|e| io(&sp, e))?;
    Ok(())
}

/// A loaded checkpoint: the policy plus what is needed to inspect or resume.
#[derive(Clone, Debug)]
pub struct Loaded {
    /// The acting policy.
    pub policy: Policy,
    /// The value network.
    pub critic: Mlp,
    /// Running observation statistics.
    pub obs_stats: RunningMoments,
    /// The sidecar.
    pub sidecar: Sidecar,
}

/// Load the policy of a checkpoint (see [`load`]).
pub fn load_policy(path: &Path) -> Result<Policy, LearnError> {
    Ok(load(path)?.policy)
}

/// Load a checkpoint and its sidecar, checking that the shapes agree.
pub fn load(path: &Path) -> Result<Loaded, LearnError> {
    let bad = |reason: String| LearnError::Checkpoint {
        path: path.to_path_buf(),
        reason,
    };
    let sp = sidecar_path(path);
    let side_bytes = std::fs::read(&sp).map_err(|source| LearnError::Io {
        path: sp.clone(),
        source,
    })?;
    let side: Sidecar = serde_json::from_slice(&side_bytes)
        .map_err(|e| bad(format!("sidecar {}: {e}", sp.display())))?;
    if side.format != FORMAT {
        return Err(bad(format!(
            "unknown format `{}`, expected `{FORMAT}`",
            side.format
        )));
    }
    let bytes = std::fs::read(path).map_err(|source| LearnError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let map = candle_core::safetensors::load_buffer(&bytes, &Device::Cpu)
        .map_err(|e| bad(format!("not a readable safetensors file: {e}")))?;
    let (o, a, sd) = (side.obs_dim, side.act_dim, side.state_dependent_std);
    let mut sizes = vec![o];
    sizes.extend(&side.hidden);
    sizes.push(if sd { 2 * a } else { a });
    let actor = read_mlp(&map, "policy", &sizes).map_err(bad)?;
    *sizes.last_mut().expect("sizes") = 1;
    let critic = read_mlp(&map, "value", &sizes).map_err(bad)?;
    let log_std = if sd {
        Vec::new()
    } else {
        read_vec::<f32>(&map, "policy.log_std", a).map_err(bad)?
    };
    let norm = ObsNormalizer {
        mean: read_vec(&map, "obs_norm.mean", o).map_err(bad)?,
        inv_std: read_vec(&map, "obs_norm.inv_std", o).map_err(bad)?,
        clip: side.obs_clip.unwrap_or(f32::INFINITY),
    };
    let mean: Vec<f64> = read_vec(&map, "obs_stats.mean", o).map_err(bad)?;
    let var: Vec<f64> = read_vec(&map, "obs_stats.var", o).map_err(bad)?;
    Ok(Loaded {
        policy: Policy {
            actor,
            log_std,
            act_dim: a,
            norm,
        },
        critic,
        obs_stats: RunningMoments::from_parts(side.obs_count, mean, &var),
        sidecar: side,
    })
}

fn read_vec<T: candle_core::WithDType>(
    map: &HashMap<String, Tensor>,
    name: &str,
    len: usize,
) -> Result<Vec<T>, String> {
    let t = map
        .get(name)
        .ok_or_else(|| format!("missing tensor `{name}`"))?;
    if t.dtype() != T::DTYPE {
        return Err(format!(
            "tensor `{name}` has dtype {:?}, expected {:?}",
            t.dtype(),
            T::DTYPE
        ));
    }
    let v = t
        .flatten_all()
        .and_then(|t| t.to_vec1::<T>())
        .map_err(|e| e.to_string())?;
    if v.len() != len {
        return Err(format!(
            "tensor `{name}` has {} values, expected {len}",
            v.len()
        ));
    }
    Ok(v)
}

fn read_mlp(map: &HashMap<String, Tensor>, prefix: &str, sizes: &[usize]) -> Result<Mlp, String> {
    let mut layers = Vec::new();
    for (i, s) in sizes.windows(2).enumerate() {
        let wname = format!("{prefix}.{i}.weight");
        let dims = map.get(&wname).map(|t| t.dims().to_vec());
        if dims.as_deref() != Some(&[s[1], s[0]][..]) {
            return Err(format!(
                "tensor `{wname}` has shape {dims:?}, expected [{}, {}]",
                s[1], s[0]
            ));
        }
        layers.push(Dense {
            n_in: s[0],
            n_out: s[1],
            w: read_vec(map, &wname, s[0] * s[1])?,
            b: read_vec(map, &format!("{prefix}.{i}.bias"), s[1])?,
        });
    }
    if map.contains_key(&format!("{prefix}.{}.weight", sizes.len() - 1)) {
        return Err(format!("`{prefix}` has more layers than the sidecar says"));
    }
    Ok(Mlp { layers })
}
