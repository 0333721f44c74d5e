//! The waypoint model's network: a tanh MLP whose weights candle trains (f32), with a plain-Rust f64 forward
//! pass for queries (no candle, no heap allocation), the input/output scaling it was trained with, and its
//! safetensors file.

use candle_core::{DType, Device, Tensor, Var};
use serde::{Deserialize, Serialize};
use std::collections::HashMap;
use std::path::Path;

/// Widest layer (and input) the plain forward pass supports: its scratch lives on the stack.
pub const MAX_WIDTH: usize = 256;

/// One fully connected layer `y = W x + b`, `W` row-major (n_out x n_in).
#[derive(Clone, Debug, PartialEq)]
pub struct Layer {
    pub n_in: usize,
    pub n_out: usize,
    pub w: Vec<f32>,
    pub b: Vec<f32>,
}

/// Affine scaling around the network: inputs are standardised per column, outputs share one scale, so the
/// training loss is the mean squared joint-waypoint error divided by a constant.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Scaling {
    /// Mean of each input column over the training rows.
    pub input_mean: Vec<f64>,
    /// Standard deviation of each input column over the training rows (1 for a column that does not vary).
    pub input_scale: Vec<f64>,
    /// Mean of each output column over the training rows, rad.
    pub output_mean: Vec<f64>,
    /// Root mean square of the centred outputs over all columns, rad.
    pub output_scale: f64,
}

/// A tanh MLP (tanh after every layer but the last, which is linear), input first.
#[derive(Clone, Debug, PartialEq)]
pub struct Network {
    pub layers: Vec<Layer>,
}

impl Network {
    /// Input width.
    pub fn input_dim(&self) -> usize {
        self.layers[0].n_in
    }

    /// Output width.
    pub fn output_dim(&self) -> usize {
        self.layers[self.layers.len() - 1].n_out
    }

    /// Hidden widths.
    pub fn hidden(&self) -> Vec<usize> {
        self.layers[..self.layers.len() - 1]
            .iter()
            .map(|l| l.n_out)
            .collect()
    }

    /// Forward one already scaled input in f64 into `out` (no allocation).
    pub fn forward(&self, x: &[f64], out: &mut [f64]) {
        let mut a = [0.0f64; MAX_WIDTH];
        let mut b = [0.0f64; MAX_WIDTH];
        let n_in = self.input_dim();
        a[..n_in].copy_from_slice(&x[..n_in]);
        let last = self.layers.len() - 1;
        for (k, l) in self.layers.iter().enumerate() {
            for (o, row) in l.w.chunks_exact(l.n_in).enumerate() {
                let mut s = l.b[o] as f64;
                for (w, v) in row.iter().zip(&a[..l.n_in]) {
                    s += *w as f64 * v;
                }
                b[o] = if k == last { s } else { s.tanh() };
            }
            std::mem::swap(&mut a, &mut b);
        }
        let n_out = self.output_dim();
        out[..n_out].copy_from_slice(&a[..n_out]);
    }

    /// Forward one raw input (unscaled) to raw outputs through `scaling` (no allocation).
    pub fn predict(&self, scaling: &Scaling, x: &[f64], out: &mut [f64]) {
        let mut z = [0.0f64; MAX_WIDTH];
        let d = self.input_dim();
        for i in 0..d {
            z[i] = (x[i] - scaling.input_mean[i]) / scaling.input_scale[i];
        }
        let d_out = self.output_dim();
        self.forward(&z[..d], &mut out[..d_out]);
        for (o, m) in out[..d_out].iter_mut().zip(&scaling.output_mean) {
            *o = *o * scaling.output_scale + m;
        }
    }

    /// The layers as candle variables (weights n_out x n_in, biases n_out), f32.
    pub fn vars(&self) -> candle_core::Result<Vec<(Var, Var)>> {
        let dev = Device::Cpu;
        self.layers
            .iter()
            .map(|l| {
                Ok((
                    Var::from_slice(&l.w, (l.n_out, l.n_in), &dev)?,
                    Var::from_slice(&l.b, l.n_out, &dev)?,
                ))
            })
            .collect()
    }

    /// Save the weights as safetensors (`layer.<k>.weight`, `layer.<k>.bias`, f32), atomically.
    pub fn save(&self, path: &Path) -> std::io::Result<()> {
        let mut map = HashMap::new();
        let other = |e: candle_core::Error| std::io::Error::other(e.to_string());
        for (k, l) in self.layers.iter().enumerate() {
            let w = Tensor::from_slice(&l.w, (l.n_out, l.n_in), &Device::Cpu).map_err(other)?;
            let b = Tensor::from_slice(&l.b, l.n_out, &Device::Cpu).map_err(other)?;
            map.insert(format!("layer.{k}.weight"), w);
            map.insert(format!("layer.{k}.bias"), b);
        }
        if let Some(dir) = path.parent().filter(|p| !p.as_os_str().is_empty()) {
            std::fs::create_dir_all(dir)?;
        }
        let tmp = crate::fsio::temp_sibling(path);
        candle_core::safetensors::save(&map, &tmp).map_err(other)?;
        std::fs::rename(&tmp, path).inspect_err(|_| {
            let _ = std::fs::remove_file(&tmp);
        })
    }

    /// Load weights saved by [`Network::save`] for layer widths `sizes` (input, hidden..., output).
    pub fn load(path: &Path, sizes: &[usize]) -> Result<Network, String> {
        let map = candle_core::safetensors::load(path, &Device::Cpu)
            .map_err(|e| format!("not a readable safetensors file: {e}"))?;
        let mut layers = Vec::new();
        for (k, s) in sizes.windows(2).enumerate() {
            let (n_in, n_out) = (s[0], s[1]);
            if n_in > MAX_WIDTH || n_out > MAX_WIDTH {
                return Err(format!("layer {k} is wider than {MAX_WIDTH} units"));
            }
            let read = |name: String, len: usize| -> Result<Vec<f32>, String> {
                let t = map
                    .get(&name)
                    .ok_or_else(|| format!("tensor `{name}` is missing"))?;
                let v = t
                    .to_dtype(DType::F32)
                    .and_then(|t| t.flatten_all())
                    .and_then(|t| t.to_vec1::<f32>())
                    .map_err(|e| format!("tensor `{name}`: {e}"))?;
                if v.len() != len {
                    return Err(format!(
                        "tensor `{name}` has {} values, the model's layout needs {len}",
                        v.len()
                    ));
                }
                if v.iter().any(|x| !x.is_finite()) {
                    return Err(format!("tensor `{name}` holds a non-finite value"));
                }
                Ok(v)
            };
            layers.push(Layer {
                n_in,
                n_out,
                w: read(format!("layer.{k}.weight"), n_in * n_out)?,
                b: read(format!("layer.{k}.bias"), n_out)?,
            });
        }
        Ok(Network { layers })
    }
}

/// candle's forward pass over a batch `x` (rows x input) through `vars`: `x W^T + b` per layer, tanh between
/// layers. What training differentiates; `Network::forward` must agree with it.
pub fn forward_t(x: &Tensor, vars: &[(Var, Var)]) -> candle_core::Result<Tensor> {
    let mut h = x.clone();
    for (k, (w, b)) in vars.iter().enumerate() {
        h = h.matmul(&w.t()?)?.broadcast_add(b.as_tensor())?;
        if k + 1 < vars.len() {
            h = h.tanh()?;
        }
    }
    Ok(h)
}
