//! The fused update path: the PPO loss of one minibatch and its gradients computed by hand over
//! contiguous f32 buffers — batched forward of both networks, the loss head (clipped surrogate,
//! value loss, entropy) and backpropagation — with the matrix products and element-wise loops of
//! [`super::kernels`] (AVX-512, AVX2 or portable, picked at run time, the same bits on each) and
//! no allocation once the workspace has grown to the minibatch size.
//!
//! It computes exactly the loss of [`super::ppo::loss_and_grads`] (the generic candle autograd
//! path): the same formulas, the same fast tanh, the same sub-gradients where a `min`, `max` or
//! clamp is tied (candle splits a tie evenly between its arguments). A test checks that both
//! give the same losses and gradients within 1e-5; the candle path is in turn checked against
//! central finite differences.
//!
//! Backpropagation through a layer `Z = H W^T + 1 b^T`, `H' = tanh(Z)` (the chain rule; e.g.
//! Goodfellow, Bengio, Courville, "Deep Learning", 2016, section 6.5): `dW = dZ^T H`,
//! `db = 1^T dZ`, `dH = dZ W`, `dZ_prev = dH * (1 - H^2)`.

use super::config::PpoConfig;
use super::gaussian::HALF_LN_2PI;
use super::kernels::KernelPath;
use super::mlp::Mlp;
use super::policy::{Policy, LOG_STD_MAX, LOG_STD_MIN};
use super::ppo::{Minibatch, MinibatchResult};

#[cfg(test)]
mod tests;

/// Per-network buffers for one minibatch.
#[derive(Clone, Debug, Default)]
struct NetBuffers {
    /// Layer outputs (n x width): tanh'd for hidden layers, linear for the last.
    acts: Vec<Vec<f32>>,
    /// Gradient with respect to the current layer's pre-activation, and the one below.
    dz: Vec<f32>,
    dz_below: Vec<f32>,
    /// Each layer's weights transposed (n_in x n_out), as the forward product reads them.
    wt: Vec<Vec<f32>>,
}

/// Reusable buffers of the fused path (grow to the largest minibatch seen, then stay), and the
/// kernel path it computes with.
#[derive(Clone, Debug)]
pub struct FusedWorkspace {
    path: KernelPath,
    actor: NetBuffers,
    critic: NetBuffers,
    /// Gradient of the loss with respect to the network outputs (n x out).
    d_out: Vec<f32>,
    /// Per-sample scratch of the policy head (act_dim each): standardised action, 1 / sigma.
    z: Vec<f32>,
    inv_sigma: Vec<f32>,
}

impl Default for FusedWorkspace {
    /// A workspace on the process's kernel path ([`KernelPath::active`]).
    fn default() -> Self {
        Self::with_path(KernelPath::active())
    }
}

impl FusedWorkspace {
    /// A workspace computing with `path` (panics on use if the CPU lacks it).
    pub fn with_path(path: KernelPath) -> Self {
        FusedWorkspace {
            path,
            actor: NetBuffers::default(),
            critic: NetBuffers::default(),
            d_out: Vec::new(),
            z: Vec::new(),
            inv_sigma: Vec::new(),
        }
    }

    /// The kernel path this workspace computes with.
    pub fn path(&self) -> KernelPath {
        self.path
    }
}

/// Buffers for batched inference of one network (the rollout's policy and value passes over all
/// environments at once); they grow to the largest batch and then stay.
#[derive(Clone, Debug)]
pub(crate) struct BatchForward {
    path: KernelPath,
    bufs: NetBuffers,
}

impl Default for BatchForward {
    fn default() -> Self {
        Self::with_path(KernelPath::active())
    }
}

impl BatchForward {
    /// Batched inference on `path`.
    pub(crate) fn with_path(path: KernelPath) -> Self {
        BatchForward {
            path,
            bufs: NetBuffers::default(),
        }
    }

    /// Take `m`'s current weights (transposed for the products); call again after they change.
    pub(crate) fn prepare(&mut self, m: &Mlp) {
        pack(m, &mut self.bufs);
    }

    /// Outputs of `m` for the `n` rows of `x` (row-major `n x input_dim`), row-major
    /// `n x output_dim`: the same products and fast tanh as the update's forward pass. `m` must
    /// be the network last given to [`Self::prepare`], with the same weights.
    pub(crate) fn run_prepared(&mut self, m: &Mlp, x: &[f32], n: usize) -> &[f32] {
        forward(self.path, m, x, n, &mut self.bufs);
        &self.bufs.acts[m.layers.len() - 1][..n * m.output_dim()]
    }

    /// [`Self::prepare`] then [`Self::run_prepared`].
    #[cfg(test)]
    pub(crate) fn run(&mut self, m: &Mlp, x: &[f32], n: usize) -> &[f32] {
        self.prepare(m);
        self.run_prepared(m, x, n)
    }
}

/// Outputs narrower than this use the dot-product kernel (one vector along the output would be
/// mostly empty); the same on every path, so every path gives the same bits.
const NARROW: usize = 8;

/// Transpose each wide layer's weights into `bufs.wt` (n_in x n_out, row-major).
fn pack(m: &Mlp, bufs: &mut NetBuffers) {
    bufs.wt.resize_with(m.layers.len(), Vec::new);
    for (layer, wt) in m.layers.iter().zip(bufs.wt.iter_mut()) {
        if layer.n_out < NARROW {
            continue;
        }
        wt.resize(layer.n_in * layer.n_out, 0.0);
        transpose_into(&layer.w, layer.n_out, layer.n_in, wt);
    }
}

/// `wt[i][o] = w[o][i]` for row-major `w` (`rows x cols`) and `wt` (`cols x rows`). Blocks of eight
/// rows of `w`, so each row of `wt` gets eight neighbouring values per pass (a plain scatter by
/// element cost about half as much again, with a bounds check per store).
fn transpose_into(w: &[f32], rows: usize, cols: usize, wt: &mut [f32]) {
    const B: usize = 8;
    assert!(w.len() == rows * cols && wt.len() == rows * cols);
    let mut r0 = 0;
    while r0 + B <= rows {
        let block: [&[f32]; B] = std::array::from_fn(|r| &w[(r0 + r) * cols..][..cols]);
        for (i, dst) in wt.chunks_exact_mut(rows).enumerate() {
            for (d, src) in dst[r0..r0 + B].iter_mut().zip(&block) {
                *d = src[i];
            }
        }
        r0 += B;
    }
    for r in r0..rows {
        for (i, &x) in w[r * cols..][..cols].iter().enumerate() {
            wt[i * rows + r] = x;
        }
    }
}

/// Batched forward of `m` on `x` (n rows), filling `bufs.acts`; `bufs.wt` must hold `m`'s
/// weights packed by [`pack`].
fn forward(path: KernelPath, m: &Mlp, x: &[f32], n: usize, bufs: &mut NetBuffers) {
    let last = m.layers.len() - 1;
    bufs.acts.resize_with(m.layers.len(), Vec::new);
    for (l, layer) in m.layers.iter().enumerate() {
        let (below, rest) = bufs.acts.split_at_mut(l);
        let input: &[f32] = if l == 0 { x } else { &below[l - 1] };
        let out = &mut rest[0];
        out.resize(n * layer.n_out, 0.0);
        let dims = (n, layer.n_out, layer.n_in);
        if layer.n_out < NARROW {
            // Z[i][j] = H[i] . W[j] + b[j].
            path.dots(dims, out, input, &layer.w, &layer.b);
        } else {
            // Z = 1 b^T + H W^T, W^T (n_in x n_out) packed.
            let wt = &bufs.wt[l];
            assert_eq!(
                wt.len(),
                layer.n_in * layer.n_out,
                "forward: weights not packed"
            );
            path.bcast(
                dims,
                out,
                layer.n_out,
                Some(&layer.b),
                input,
                (layer.n_in, 1),
                wt,
                layer.n_out,
            );
        }
        if l < last {
            path.tanh_in_place(out);
        }
    }
}

/// Backpropagate `bufs.dz` (the gradient at the network output, n x out) through `m`, writing
/// the parameter gradients (w0, b0, w1, b1, ...) into `grads`.
fn backward(
    path: KernelPath,
    m: &Mlp,
    x: &[f32],
    n: usize,
    bufs: &mut NetBuffers,
    grads: &mut [Vec<f32>],
) {
    for l in (0..m.layers.len()).rev() {
        let layer = &m.layers[l];
        let (n_in, n_out) = (layer.n_in, layer.n_out);
        let input: &[f32] = if l == 0 { x } else { &bufs.acts[l - 1] };
        let (gw, gb) = {
            let (a, b) = grads[2 * l..2 * l + 2].split_at_mut(1);
            (&mut a[0], &mut b[0])
        };
        gw.resize(n_out * n_in, 0.0);
        gb.resize(n_out, 0.0);
        let dz = &bufs.dz[..n * n_out];
        // dW = dZ^T H: dW[o][i] = sum_s dZ[s][o] H[s][i], dZ^T read with strides (1, n_out).
        path.bcast(
            (n_out, n_in, n),
            gw,
            n_in,
            None,
            dz,
            (1, n_out),
            input,
            n_in,
        );
        path.column_sums(gb, dz);
        if l > 0 {
            let dz_below = at_least(&mut bufs.dz_below, n * n_in);
            // dH = dZ W, then through tanh: dZ_below = dH (1 - H^2).
            path.bcast(
                (n, n_in, n_out),
                dz_below,
                n_in,
                None,
                dz,
                (n_out, 1),
                &layer.w,
                n_in,
            );
            path.tanh_grad_in_place(dz_below, &bufs.acts[l - 1][..n * n_in]);
            std::mem::swap(&mut bufs.dz, &mut bufs.dz_below);
        }
    }
}

/// The first `len` elements of `buf`, growing it if it is shorter (never shrinking it: the
/// gradient buffers trade places between layers and heads, and a buffer cut to a head's width
/// was zero-filled back to a hidden layer's on every minibatch). What they hold is stale: callers
/// overwrite or fill them.
fn at_least(buf: &mut Vec<f32>, len: usize) -> &mut [f32] {
    if buf.len() < len {
        buf.resize(len, 0.0);
    }
    &mut buf[..len]
}

/// Share of the gradient a `min`/`max`/clamp passes to an argument, as candle's autograd does:
/// 1 when the argument is the unique winner, 1/2 on a tie, 0 otherwise.
#[inline]
fn band_mask(x: f32, lo: f32, hi: f32) -> f32 {
    // clamp(x, lo, hi) = min(max(x, lo), hi).
    let after_max = if x > lo {
        1.0
    } else if x == lo {
        0.5
    } else {
        0.0
    };
    let y = x.max(lo);
    let after_min = if y < hi {
        1.0
    } else if y == hi {
        0.5
    } else {
        0.0
    };
    after_max * after_min
}

/// Gradient shares of `min(u, c)` (or of `max` with `prefer_larger`) to `u` and to `c`.
#[inline]
fn pick(u: f32, c: f32, prefer_larger: bool) -> (f32, f32) {
    let u_wins = if prefer_larger { u > c } else { u < c };
    if u == c {
        (0.5, 0.5)
    } else if u_wins {
        (1.0, 0.0)
    } else {
        (0.0, 1.0)
    }
}

/// Size `grads` to one vector per tensor (no allocation once the sizes are reached).
fn reset_grads(grads: &mut Vec<Vec<f32>>, sizes: impl Iterator<Item = usize> + Clone) {
    grads.resize_with(sizes.clone().count(), Vec::new);
    for (g, n) in grads.iter_mut().zip(sizes) {
        g.resize(n, 0.0);
    }
}

/// The PPO loss of [`super::ppo::loss_and_grads`] and its gradients, by the fused path, written
/// into `out` (whose vectors are reused).
pub fn loss_and_grads_into(
    policy: &Policy,
    critic: &Mlp,
    mb: &Minibatch,
    cfg: &PpoConfig,
    ws: &mut FusedWorkspace,
    out: &mut MinibatchResult,
) {
    let (n, a) = (mb.len, policy.act_dim());
    let obs = &mb.obs[..n * policy.obs_dim()];
    let state_dependent = policy.log_std.is_empty();
    let a_out = policy.actor.output_dim();
    let inv_n = 1.0 / n as f32;
    let eps = cfg.clip_epsilon;
    let (lo, hi) = ((1.0 - eps) as f32, (1.0 + eps) as f32);
    let (c1, c2) = (cfg.value_coef as f32, cfg.entropy_coef as f32);

    let path = ws.path;
    pack(&policy.actor, &mut ws.actor);
    pack(critic, &mut ws.critic);
    forward(path, &policy.actor, obs, n, &mut ws.actor);
    forward(path, critic, obs, n, &mut ws.critic);

    // Parameter gradient buffers: actor w/b per layer, then the log std if learned apart.
    reset_grads(
        &mut out.policy_grads,
        policy
            .actor
            .layers
            .iter()
            .flat_map(|l| [l.w.len(), l.b.len()])
            .chain((!state_dependent).then_some(a)),
    );
    reset_grads(
        &mut out.value_grads,
        critic.layers.iter().flat_map(|l| [l.w.len(), l.b.len()]),
    );
    out.ratios.clear();

    // Policy head.
    let mean_out = ws.actor.acts.last().expect("actor has layers");
    at_least(&mut ws.d_out, n * a_out).fill(0.0);
    let n_tensors = out.policy_grads.len();
    let mut g_log_std = if state_dependent {
        Vec::new()
    } else {
        let mut g = std::mem::take(&mut out.policy_grads[n_tensors - 1]);
        g.fill(0.0);
        g
    };
    let (mut surrogate_sum, mut entropy_sum) = (0.0f64, 0.0f64);
    // 1 / sigma per action dimension: once per minibatch when the log std is learned apart,
    // per sample otherwise; the standardised action z is kept for the gradient below.
    ws.z.resize(a, 0.0);
    ws.inv_sigma.resize(a, 0.0);
    if !state_dependent {
        for (s, &ls) in ws.inv_sigma.iter_mut().zip(&policy.log_std) {
            *s = (-ls).exp();
        }
    }
    for i in 0..n {
        let row = &mean_out[i * a_out..(i + 1) * a_out];
        let act = &mb.actions[i * a..(i + 1) * a];
        let mut logp = 0.0f32;
        for j in 0..a {
            let ls = if state_dependent {
                let ls = row[a + j].clamp(LOG_STD_MIN, LOG_STD_MAX);
                ws.inv_sigma[j] = (-ls).exp();
                ls
            } else {
                policy.log_std[j]
            };
            let z = (act[j] - row[j]) * ws.inv_sigma[j];
            ws.z[j] = z;
            logp += -0.5 * z * z - ls;
            if state_dependent {
                entropy_sum += ls as f64;
            }
        }
        logp -= (HALF_LN_2PI * a as f64) as f32;
        let ratio = (logp - mb.old_log_probs[i]).exp();
        out.ratios.push(ratio);
        let adv = mb.advantages[i];
        let unclipped = ratio * adv;
        let clipped = ratio.clamp(lo, hi) * adv;
        surrogate_sum += unclipped.min(clipped) as f64;
        let (to_u, to_c) = pick(unclipped, clipped, false);
        let d_ratio = adv * (to_u + to_c * band_mask(ratio, lo, hi));
        // loss = -mean(surrogate): d loss / d logp_i = -(1/n) d_ratio * ratio.
        let d_logp = -inv_n * d_ratio * ratio;
        let d_row = &mut ws.d_out[i * a_out..(i + 1) * a_out];
        for j in 0..a {
            let (z, inv_sigma) = (ws.z[j], ws.inv_sigma[j]);
            // d logp / d mean = z / sigma; d logp / d log sigma = z^2 - 1.
            d_row[j] = d_logp * z * inv_sigma;
            let d_ls = d_logp * (z * z - 1.0);
            if state_dependent {
                // Entropy mean over rows: d(-c2 H)/d ls_ij = -c2 / n.
                let raw_ls = row[a + j];
                d_row[a + j] = (d_ls - c2 * inv_n) * band_mask(raw_ls, LOG_STD_MIN, LOG_STD_MAX);
            } else {
                g_log_std[j] += d_ls;
            }
        }
    }
    let entropy_const = a as f64 * (0.5 + HALF_LN_2PI);
    let entropy = if state_dependent {
        entropy_sum / n as f64 + entropy_const
    } else {
        g_log_std.iter_mut().for_each(|g| *g -= c2);
        policy.log_std.iter().map(|&l| l as f64).sum::<f64>() + entropy_const
    };
    if !state_dependent {
        out.policy_grads[n_tensors - 1] = g_log_std;
    }
    std::mem::swap(&mut ws.actor.dz, &mut ws.d_out);
    backward(
        path,
        &policy.actor,
        obs,
        n,
        &mut ws.actor,
        &mut out.policy_grads[..2 * policy.actor.layers.len()],
    );

    // Value head: loss c1 * mean(per_sample) / 2.
    let values = ws.critic.acts.last().expect("critic has layers");
    at_least(&mut ws.d_out, n).fill(0.0);
    let mut value_sum = 0.0f64;
    let scale = c1 * 0.5 * inv_n;
    for i in 0..n {
        let (v, t) = (values[i], mb.targets[i]);
        let sq = (v - t) * (v - t);
        let d = if cfg.clip_value_loss {
            let ov = mb.old_values[i];
            let (elo, ehi) = (-eps as f32, eps as f32);
            let vc = ov + (v - ov).clamp(elo, ehi);
            let sqc = (vc - t) * (vc - t);
            value_sum += sq.max(sqc) as f64;
            let (to_sq, to_c) = pick(sq, sqc, true);
            to_sq * 2.0 * (v - t) + to_c * 2.0 * (vc - t) * band_mask(v - ov, elo, ehi)
        } else {
            value_sum += sq as f64;
            2.0 * (v - t)
        };
        ws.d_out[i] = scale * d;
    }
    std::mem::swap(&mut ws.critic.dz, &mut ws.d_out);
    backward(path, critic, obs, n, &mut ws.critic, &mut out.value_grads);

    out.policy_loss = (-surrogate_sum / n as f64) as f32;
    out.value_loss = (0.5 * value_sum / n as f64) as f32;
    out.entropy = entropy as f32;
}

/// A fresh, empty result to pass to [`loss_and_grads_into`].
pub fn empty_result() -> MinibatchResult {
    MinibatchResult {
        policy_loss: 0.0,
        value_loss: 0.0,
        entropy: 0.0,
        ratios: Vec::new(),
        policy_grads: Vec::new(),
        value_grads: Vec::new(),
    }
}
