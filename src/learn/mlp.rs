//! The multilayer perceptron in plain f32 Rust: weights of the policy-mean and value networks,
//! orthogonal initialisation, the one-sample forward pass (no allocation; replay, probes and the
//! value of a cut-off episode's last state) and the same pass for eight samples side by side
//! (evaluation episodes in step). The rollout's batched pass and the update's products are in
//! `fused` and `kernels`; the candle path copies these weights into tensors for autograd.

use rand::Rng;

use super::activation::tanh_fast;
use super::gaussian::fill_standard_normal;
use super::kernels::KernelPath;

/// One fully connected layer `y = W x + b`, `W` row-major (n_out x n_in).
#[derive(Clone, Debug, PartialEq)]
pub struct Dense {
    /// Input width.
    pub n_in: usize,
    /// Output width.
    pub n_out: usize,
    /// Weights, row-major n_out x n_in.
    pub w: Vec<f32>,
    /// Biases, n_out.
    pub b: Vec<f32>,
}

/// A tanh MLP: tanh ([`tanh_fast`]) after every layer but the last (linear output).
#[derive(Clone, Debug, PartialEq)]
pub struct Mlp {
    /// The layers, input first.
    pub layers: Vec<Dense>,
}

/// A random matrix (row-major rows x cols) with orthonormal rows or columns, scaled by `gain`:
/// Gaussian entries orthonormalised by modified Gram-Schmidt, which gives the uniform (Haar)
/// distribution on orthogonal matrices (Saxe, McClelland, Ganguli, "Exact solutions to the
/// nonlinear dynamics of learning in deep linear neural networks", ICLR 2014, propose this
/// initialisation).
pub fn orthogonal<R: Rng>(rows: usize, cols: usize, gain: f32, rng: &mut R) -> Vec<f32> {
    let (long, short) = (rows.max(cols), rows.min(cols));
    let mut g = vec![0.0f32; long * short];
    fill_standard_normal(rng, &mut g);
    // `short` vectors of length `long`, orthonormalised in f64.
    let mut q: Vec<Vec<f64>> = g
        .chunks(long)
        .map(|c| c.iter().map(|&x| x as f64).collect())
        .collect();
    for j in 0..short {
        for k in 0..j {
            let d: f64 = q[k].iter().zip(&q[j]).map(|(a, b)| a * b).sum();
            let qk = q[k].clone();
            q[j].iter_mut().zip(&qk).for_each(|(x, y)| *x -= d * y);
        }
        let n = q[j].iter().map(|x| x * x).sum::<f64>().sqrt().max(1e-30);
        q[j].iter_mut().for_each(|x| *x /= n);
    }
    let mut w = vec![0.0f32; rows * cols];
    for r in 0..rows {
        for c in 0..cols {
            // rows <= cols: row r is q[r]; rows > cols: column c is q[c].
            let v = if rows <= cols { q[r][c] } else { q[c][r] };
            w[r * cols + c] = gain * v as f32;
        }
    }
    w
}

/// Dot product with eight independent accumulators (lets the compiler use SIMD; the summation
/// order is fixed, so results are reproducible).
#[inline]
fn dot(a: &[f32], b: &[f32]) -> f32 {
    let mut acc = [0.0f32; 8];
    let ca = a.chunks_exact(8);
    let cb = b.chunks_exact(8);
    let (ra, rb) = (ca.remainder(), cb.remainder());
    for (x, y) in ca.zip(cb) {
        for k in 0..8 {
            acc[k] += x[k] * y[k];
        }
    }
    let mut s = ((acc[0] + acc[4]) + (acc[1] + acc[5])) + ((acc[2] + acc[6]) + (acc[3] + acc[7]));
    for (x, y) in ra.iter().zip(rb) {
        s += x * y;
    }
    s
}

/// Samples per call of [`Mlp::forward_lanes`].
pub use super::kernels::LANES;

impl Mlp {
    /// An MLP with layer widths `sizes` (input, hidden..., output), orthogonal weights with gain
    /// `hidden_gain` on hidden layers and `out_gain` on the output layer, zero biases.
    pub fn orthogonal<R: Rng>(
        sizes: &[usize],
        hidden_gain: f32,
        out_gain: f32,
        rng: &mut R,
    ) -> Self {
        assert!(sizes.len() >= 2, "an MLP needs input and output sizes");
        let last = sizes.len() - 2;
        let layers = sizes
            .windows(2)
            .enumerate()
            .map(|(i, s)| {
                let gain = if i == last { out_gain } else { hidden_gain };
                Dense {
                    n_in: s[0],
                    n_out: s[1],
                    w: orthogonal(s[1], s[0], gain, rng),
                    b: vec![0.0; s[1]],
                }
            })
            .collect();
        Mlp { layers }
    }

    /// Input width.
    pub fn input_dim(&self) -> usize {
        self.layers[0].n_in
    }

    /// Output width.
    pub fn output_dim(&self) -> usize {
        self.layers[self.layers.len() - 1].n_out
    }

    /// Widest layer output (scratch size).
    pub fn max_width(&self) -> usize {
        self.layers.iter().map(|l| l.n_out).max().unwrap_or(0)
    }

    /// Forward one sample into `out` using two scratch buffers of at least `max_width`.
    pub fn forward(&self, x: &[f32], s0: &mut [f32], s1: &mut [f32], out: &mut [f32]) {
        let n = self.layers.len();
        let (mut cur, mut nxt) = (s0, s1);
        for (i, l) in self.layers.iter().enumerate() {
            let input: &[f32] = if i == 0 { x } else { &cur[..l.n_in] };
            let dst: &mut [f32] = if i + 1 == n {
                &mut *out
            } else {
                &mut nxt[..l.n_out]
            };
            for (o, (row, &b)) in l.w.chunks_exact(l.n_in).zip(&l.b).enumerate() {
                let y = dot(row, input) + b;
                dst[o] = if i + 1 == n { y } else { tanh_fast(y) };
            }
            std::mem::swap(&mut cur, &mut nxt);
        }
    }

    /// Forward [`LANES`] samples at once, each exactly as [`Mlp::forward`] computes it (the same
    /// operations in the same order, so the same bits), with the samples side by side in the lanes:
    /// `xt[i]` holds input `i` of every sample and `out[o]` receives output `o` of every sample. Where
    /// `forward` waits on one chain of additions per output, this keeps `8 x LANES` independent
    /// chains going, which is what makes evaluating many episodes in step cheaper than one at a time.
    /// `s0` and `s1` are scratch of at least `max_width` entries.
    pub fn forward_lanes(
        &self,
        xt: &[[f32; LANES]],
        s0: &mut [[f32; LANES]],
        s1: &mut [[f32; LANES]],
        out: &mut [[f32; LANES]],
    ) {
        let n = self.layers.len();
        let (mut cur, mut nxt) = (s0, s1);
        for (i, l) in self.layers.iter().enumerate() {
            let input: &[[f32; LANES]] = if i == 0 { xt } else { &cur[..l.n_in] };
            let dst: &mut [[f32; LANES]] = if i + 1 == n {
                &mut *out
            } else {
                &mut nxt[..l.n_out]
            };
            KernelPath::active().dense_lanes(&l.w, &l.b, input, dst, i + 1 < n);
            std::mem::swap(&mut cur, &mut nxt);
        }
    }

    /// Forward one sample, allocating its own scratch (evaluation convenience).
    pub fn forward_alloc(&self, x: &[f32], out: &mut [f32]) {
        let w = self.max_width();
        let (mut a, mut b) = (vec![0.0; w], vec![0.0; w]);
        self.forward(x, &mut a, &mut b, out);
    }

    /// Parameter tensors in a fixed order: w0, b0, w1, b1, ...
    pub fn tensors(&self) -> Vec<&[f32]> {
        self.layers
            .iter()
            .flat_map(|l| [&l.w[..], &l.b[..]])
            .collect()
    }

    /// Mutable parameter tensors, same order as [`Mlp::tensors`].
    pub fn tensors_mut(&mut self) -> Vec<&mut [f32]> {
        self.layers
            .iter_mut()
            .flat_map(|l| [&mut l.w[..], &mut l.b[..]])
            .collect()
    }

    /// True when every weight and bias is finite.
    pub fn all_finite(&self) -> bool {
        self.tensors()
            .iter()
            .all(|t| t.iter().all(|x| x.is_finite()))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    fn gram(w: &[f32], rows: usize, cols: usize, by_rows: bool) -> Vec<f64> {
        let k = if by_rows { rows } else { cols };
        let mut g = vec![0.0f64; k * k];
        for i in 0..k {
            for j in 0..k {
                g[i * k + j] = if by_rows {
                    (0..cols)
                        .map(|c| (w[i * cols + c] * w[j * cols + c]) as f64)
                        .sum()
                } else {
                    (0..rows)
                        .map(|r| (w[r * cols + i] * w[r * cols + j]) as f64)
                        .sum()
                };
            }
        }
        g
    }

    #[test]
    fn orthogonal_matrices_are_orthogonal_times_gain() {
        // Definition of an orthogonal (semi-orthogonal) matrix: W W^T = I for wide W, W^T W = I
        // for tall W (Saxe et al. 2014, section 3); with the gain g the Gram matrix is g^2 I.
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(1);
        for &(r, c, by_rows) in &[(4usize, 9usize, true), (9, 4, false), (6, 6, true)] {
            let w = orthogonal(r, c, 2.0, &mut rng);
            let g = gram(&w, r, c, by_rows);
            let k = if by_rows { r } else { c };
            for i in 0..k {
                for j in 0..k {
                    let e = if i == j { 4.0 } else { 0.0 };
                    assert!(
                        (g[i * k + j] - e).abs() < 1e-5,
                        "{r}x{c} ({i},{j}) {}",
                        g[i * k + j]
                    );
                }
            }
        }
    }

    // No outside source: a cross-check of two orderings of the same arithmetic. `forward_lanes` must give
    // every sample the bits `forward` gives it, at widths that leave tails of `dot`'s 8-entry chunks
    // (45 and 21 inputs) and with inputs beyond tanh's clamp.
    #[test]
    fn forward_lanes_gives_each_sample_the_bits_of_forward() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        for sizes in [&[45usize, 64, 64, 4][..], &[21, 64, 64, 2], &[3, 5, 1]] {
            let m = Mlp::orthogonal(sizes, 1.4, 0.5, &mut rng);
            let (n_in, n_out, w) = (m.input_dim(), m.output_dim(), m.max_width());
            let mut x = vec![0.0f32; LANES * n_in];
            fill_standard_normal(&mut rng, &mut x);
            x.iter_mut().step_by(5).for_each(|v| *v *= 9.0);
            let mut xt = vec![[0.0f32; LANES]; n_in];
            for (l, row) in x.chunks_exact(n_in).enumerate() {
                for (i, &v) in row.iter().enumerate() {
                    xt[i][l] = v;
                }
            }
            let (mut t0, mut t1) = (vec![[0.0f32; LANES]; w], vec![[0.0f32; LANES]; w]);
            let mut yt = vec![[0.0f32; LANES]; n_out];
            m.forward_lanes(&xt, &mut t0, &mut t1, &mut yt);
            for (l, row) in x.chunks_exact(n_in).enumerate() {
                let mut y = vec![0.0f32; n_out];
                m.forward_alloc(row, &mut y);
                for (o, &v) in y.iter().enumerate() {
                    assert_eq!(
                        yt[o][l].to_bits(),
                        v.to_bits(),
                        "{sizes:?} lane {l} output {o}"
                    );
                }
            }
        }
    }

    #[test]
    fn forward_matches_a_hand_computed_network() {
        // y = W2 tanh(W1 x + b1) + b2 with W1 = [[1, 2], [0, -1]], b1 = [0.5, 0], W2 = [[1, -1]],
        // b2 = [0.25], x = (0.1, 0.2): hidden = tanh(0.1 + 0.4 + 0.5, -0.2) = (tanh 1, tanh -0.2).
        let m = Mlp {
            layers: vec![
                Dense {
                    n_in: 2,
                    n_out: 2,
                    w: vec![1.0, 2.0, 0.0, -1.0],
                    b: vec![0.5, 0.0],
                },
                Dense {
                    n_in: 2,
                    n_out: 1,
                    w: vec![1.0, -1.0],
                    b: vec![0.25],
                },
            ],
        };
        let mut y = [0.0f32];
        m.forward_alloc(&[0.1, 0.2], &mut y);
        let expect = 1f64.tanh() - (-0.2f64).tanh() + 0.25;
        assert!((y[0] as f64 - expect).abs() < 1e-6);
    }
}
