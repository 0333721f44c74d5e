//! Supervised regression for the waypoint model: a seeded train/validation split, inputs standardised with
//! the training rows' statistics, mean squared error minimised by Adam over candle's gradients, and early
//! stopping on the validation error with patience, keeping the best weights.
//!
//! Sources: least-squares regression with a mean-squared-error loss is common practice; Adam: Kingma & Ba,
//! "Adam: A Method for Stochastic Optimization", ICLR 2015 (Algorithm 1; `learn::Adam`); early stopping with a
//! validation set and patience: Prechelt, "Early stopping — but when?", in Neural Networks: Tricks of the
//! Trade, Springer 1998.

use crate::learn::{orthogonal, Adam, AdamParams};
use crate::plan::learned::network::{forward_t, Layer, Network, Scaling};
use crate::plan::learned::{TrainSpec, TrainSummary};
use candle_core::{Device, Tensor};
use rand::seq::SliceRandom;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

/// A trained network with its scaling and summary.
pub struct Trained {
    pub net: Network,
    pub scaling: Scaling,
    pub summary: TrainSummary,
}

/// Scaling from the rows `idx` of `x` (d_in wide) and `y` (d_out wide).
fn scaling(x: &[f64], y: &[f64], d_in: usize, d_out: usize, idx: &[usize]) -> Scaling {
    let n = idx.len().max(1) as f64;
    let mean = |m: &[f64], d: usize, j: usize| idx.iter().map(|&r| m[r * d + j]).sum::<f64>() / n;
    let input_mean: Vec<f64> = (0..d_in).map(|j| mean(x, d_in, j)).collect();
    let input_scale = (0..d_in)
        .map(|j| {
            let v = idx
                .iter()
                .map(|&r| (x[r * d_in + j] - input_mean[j]).powi(2))
                .sum::<f64>()
                / n;
            let s = v.sqrt();
            if s > 1e-9 * (1.0 + input_mean[j].abs()) {
                s
            } else {
                1.0
            }
        })
        .collect();
    let output_mean: Vec<f64> = (0..d_out).map(|j| mean(y, d_out, j)).collect();
    let ss: f64 = idx
        .iter()
        .flat_map(|&r| (0..d_out).map(move |j| (r, j)))
        .map(|(r, j)| (y[r * d_out + j] - output_mean[j]).powi(2))
        .sum();
    let rms = (ss / (n * d_out as f64)).sqrt();
    Scaling {
        input_mean,
        input_scale,
        output_mean,
        output_scale: if rms > 1e-12 { rms } else { 1.0 },
    }
}

/// Scaled f32 copies of the rows `idx`.
fn gather(x: &[f64], y: &[f64], s: &Scaling, idx: &[usize]) -> (Vec<f32>, Vec<f32>) {
    let (d_in, d_out) = (s.input_mean.len(), s.output_mean.len());
    let mut xs = Vec::with_capacity(idx.len() * d_in);
    let mut ys = Vec::with_capacity(idx.len() * d_out);
    for &r in idx {
        for j in 0..d_in {
            xs.push(((x[r * d_in + j] - s.input_mean[j]) / s.input_scale[j]) as f32);
        }
        for j in 0..d_out {
            ys.push(((y[r * d_out + j] - s.output_mean[j]) / s.output_scale) as f32);
        }
    }
    (xs, ys)
}

/// Mean squared (scaled) error of `net` on scaled rows, through candle.
fn mse(net: &Network, xs: &[f32], ys: &[f32]) -> candle_core::Result<f64> {
    let (d_in, d_out) = (net.input_dim(), net.output_dim());
    let rows = xs.len() / d_in;
    if rows == 0 {
        return Ok(f64::NAN);
    }
    let vars = net.vars()?;
    let x = Tensor::from_slice(xs, (rows, d_in), &Device::Cpu)?;
    let y = Tensor::from_slice(ys, (rows, d_out), &Device::Cpu)?;
    let e = (forward_t(&x, &vars)? - y)?.sqr()?.mean_all()?;
    Ok(e.to_scalar::<f32>()? as f64)
}

/// Fit `y` (rows x d_out) from `x` (rows x d_in) by minimising the mean squared error. Deterministic for a seed
/// (candle runs single-threaded: `learn::pin_kernel_threads`).
pub fn train(
    x: &[f64],
    y: &[f64],
    d_in: usize,
    d_out: usize,
    spec: &TrainSpec,
) -> candle_core::Result<Trained> {
    crate::learn::pin_kernel_threads();
    let rows = x.len() / d_in;
    let mut rng = ChaCha8Rng::seed_from_u64(spec.seed);
    let mut order: Vec<usize> = (0..rows).collect();
    order.shuffle(&mut rng);
    let n_val =
        ((rows as f64 * spec.validation_fraction).round() as usize).min(rows.saturating_sub(1));
    let (val_idx, train_idx) = order.split_at(n_val);
    let sc = scaling(x, y, d_in, d_out, train_idx);
    let (xt, yt) = gather(x, y, &sc, train_idx);
    let (xv, yv) = gather(x, y, &sc, val_idx);
    let mut sizes = vec![d_in];
    sizes.extend(&spec.hidden);
    sizes.push(d_out);
    let mut net = Network {
        layers: sizes
            .windows(2)
            .map(|s| Layer {
                n_in: s[0],
                n_out: s[1],
                w: orthogonal(s[1], s[0], 1.0, &mut rng),
                b: vec![0.0; s[1]],
            })
            .collect(),
    };
    let param_sizes: Vec<usize> = net
        .layers
        .iter()
        .flat_map(|l| [l.w.len(), l.b.len()])
        .collect();
    let mut adam = Adam::new(&param_sizes, AdamParams::default());
    let n_train = train_idx.len();
    let batch = spec.batch.clamp(1, n_train.max(1));
    let mut perm: Vec<usize> = (0..n_train).collect();
    let (mut best, mut best_epoch, mut since, mut epochs) = (net.clone(), 0, 0, 0);
    let mut best_val = f64::INFINITY;
    let mut stopped_by = "max-epochs";
    let mut bx = Vec::with_capacity(batch * d_in);
    let mut by = Vec::with_capacity(batch * d_out);
    for epoch in 1..=spec.max_epochs {
        epochs = epoch;
        perm.shuffle(&mut rng);
        for chunk in perm.chunks(batch) {
            bx.clear();
            by.clear();
            for &r in chunk {
                bx.extend_from_slice(&xt[r * d_in..(r + 1) * d_in]);
                by.extend_from_slice(&yt[r * d_out..(r + 1) * d_out]);
            }
            let vars = net.vars()?;
            let xb = Tensor::from_slice(&bx, (chunk.len(), d_in), &Device::Cpu)?;
            let yb = Tensor::from_slice(&by, (chunk.len(), d_out), &Device::Cpu)?;
            let loss = (forward_t(&xb, &vars)? - yb)?.sqr()?.mean_all()?;
            let grads = loss.backward()?;
            let mut g = Vec::with_capacity(param_sizes.len());
            for (w, b) in &vars {
                for v in [w, b] {
                    g.push(match grads.get(v.as_tensor()) {
                        Some(t) => t.flatten_all()?.to_vec1::<f32>()?,
                        None => vec![0.0; v.elem_count()],
                    });
                }
            }
            let mut params: Vec<&mut [f32]> = net
                .layers
                .iter_mut()
                .flat_map(|l| [&mut l.w[..], &mut l.b[..]])
                .collect();
            adam.step(spec.learning_rate, &mut params, &g);
        }
        // Without validation rows the training error decides (no early stopping in effect).
        let val = if xv.is_empty() {
            mse(&net, &xt, &yt)?
        } else {
            mse(&net, &xv, &yv)?
        };
        if !val.is_finite() {
            stopped_by = "diverged";
            break;
        }
        if val < best_val {
            (best_val, best, best_epoch, since) = (val, net.clone(), epoch, 0);
        } else {
            since += 1;
            if since >= spec.patience {
                stopped_by = "patience";
                break;
            }
        }
    }
    let s2 = sc.output_scale * sc.output_scale;
    let summary = TrainSummary {
        epochs,
        best_epoch,
        best_validation_mse: best_val * s2,
        train_mse: mse(&best, &xt, &yt)? * s2,
        train_rows: n_train,
        validation_rows: val_idx.len(),
        stopped_by: stopped_by.into(),
    };
    Ok(Trained {
        net: best,
        scaling: sc,
        summary,
    })
}
