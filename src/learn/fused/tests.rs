//! Unit tests of the fused update against the candle reference path.

use super::super::ppo::{cases, loss_and_grads};
use super::*;

/// |x - y| <= 1e-5 * max(1, scale): absolute for O(1) values, relative for larger tensors.
fn close(x: f32, y: f32, scale: f32) -> bool {
    (x - y).abs() <= 1e-5 * scale.max(1.0)
}

#[test]
fn batched_rollout_forward_matches_the_per_sample_forward() {
    // The rollout runs both networks over all environments in one gemm batch; the result
    // must be the per-sample `Mlp::forward` (plain dot products) up to summation order; that
    // reference is itself checked against a hand-computed network in mlp.rs.
    let c = cases::random_case(7, &[25, 64, 64, 2], 16, false, PpoConfig::default());
    for (net, path) in [&c.policy.actor, &c.critic]
        .into_iter()
        .flat_map(|n| supported_paths().into_iter().map(move |p| (n, p)))
    {
        let mut bf = BatchForward::with_path(path);
        let out_dim = net.output_dim();
        let got = bf.run(net, &c.mb.obs, 16).to_vec();
        assert_eq!(got.len(), 16 * out_dim);
        let mut want = vec![0.0; out_dim];
        for (r, x) in c.mb.obs.chunks_exact(25).enumerate() {
            net.forward_alloc(x, &mut want);
            for (g, w) in got[r * out_dim..(r + 1) * out_dim].iter().zip(&want) {
                assert!(close(*g, *w, w.abs()), "{path:?} row {r}: {g} vs {w}");
            }
        }
    }
}

#[test]
fn fused_path_matches_the_candle_path() {
    // The fused path must compute the same loss and gradients as candle's autograd (the
    // generic path, itself checked against finite differences in ppo.rs) on random inputs:
    // several shapes, both std variants, the optional loss parts on and off.
    let plain = PpoConfig::default();
    let shapes: [&[usize]; 3] = [&[23, 64, 64, 2], &[7, 16, 16, 16, 3], &[5, 9, 1]];
    for path in supported_paths() {
        let mut ws = FusedWorkspace::with_path(path);
        let mut got = empty_result();
        let mut checked = 0;
        for (k, sizes) in shapes.iter().enumerate() {
            for sd in [false, true] {
                for cfg in [plain.clone(), cases::full_loss()] {
                    let n = [256, 37, 1][k];
                    let c = cases::random_case(100 + k as u64, sizes, n, sd, cfg);
                    let want = loss_and_grads(&c.policy, &c.critic, &c.mb, &c.cfg).unwrap();
                    // The same workspace across cases of different shapes: it must resize.
                    loss_and_grads_into(&c.policy, &c.critic, &c.mb, &c.cfg, &mut ws, &mut got);
                    let ctx = format!(
                        "{} shape {sizes:?} sd {sd} clip {}",
                        path.name(),
                        c.cfg.clip_value_loss
                    );
                    assert!(close(got.policy_loss, want.policy_loss, 1.0), "{ctx}");
                    assert!(
                        close(got.value_loss, want.value_loss, want.value_loss.abs()),
                        "{ctx}"
                    );
                    assert!(
                        close(got.entropy, want.entropy, want.entropy.abs()),
                        "{ctx}"
                    );
                    for (x, y) in got.ratios.iter().zip(&want.ratios) {
                        assert!(close(*x, *y, y.abs()), "{ctx}: ratio {x} vs {y}");
                    }
                    for (gs, ws_) in [
                        (&got.policy_grads, &want.policy_grads),
                        (&got.value_grads, &want.value_grads),
                    ] {
                        assert_eq!(gs.len(), ws_.len(), "{ctx}");
                        for (t, (g, w)) in gs.iter().zip(ws_).enumerate() {
                            assert_eq!(g.len(), w.len(), "{ctx} tensor {t}");
                            let scale = w.iter().fold(0.0f32, |m, x| m.max(x.abs()));
                            for (i, (x, y)) in g.iter().zip(w).enumerate() {
                                assert!(close(*x, *y, scale), "{ctx} tensor {t}[{i}]: {x} vs {y}");
                            }
                        }
                    }
                    checked += 1;
                }
            }
        }
        assert_eq!(checked, 12);
    }
}

fn supported_paths() -> Vec<KernelPath> {
    KernelPath::ALL
        .into_iter()
        .filter(|p| p.supported())
        .collect()
}

#[test]
fn every_kernel_path_gives_the_same_bits() {
    // The kernels fix each output's summation order, so the vector width must not change
    // a single bit of the losses or gradients (a study reproduces across CPUs).
    let c = cases::random_case(9, &[25, 64, 64, 2], 256, false, cases::full_loss());
    let run = |p: KernelPath| {
        let mut ws = FusedWorkspace::with_path(p);
        let mut out = empty_result();
        loss_and_grads_into(&c.policy, &c.critic, &c.mb, &c.cfg, &mut ws, &mut out);
        let mut bits = vec![
            out.policy_loss.to_bits(),
            out.value_loss.to_bits(),
            out.entropy.to_bits(),
        ];
        bits.extend(out.ratios.iter().map(|x| x.to_bits()));
        for g in out.policy_grads.iter().chain(&out.value_grads) {
            bits.extend(g.iter().map(|x| x.to_bits()));
        }
        bits
    };
    let paths = supported_paths();
    let first = run(paths[0]);
    assert!(first.len() > 10_000);
    for &p in &paths[1..] {
        assert!(
            run(p) == first,
            "{} differs from {}",
            p.name(),
            paths[0].name()
        );
    }
}

#[test]
fn workspace_stops_allocating_after_the_first_minibatch() {
    let c = cases::random_case(5, &[23, 64, 64, 2], 256, false, PpoConfig::default());
    let mut ws = FusedWorkspace::default();
    let mut out = empty_result();
    loss_and_grads_into(&c.policy, &c.critic, &c.mb, &c.cfg, &mut ws, &mut out);
    let ptrs = |ws: &FusedWorkspace, out: &MinibatchResult| {
        let mut v: Vec<*const f32> = ws.actor.acts.iter().map(|a| a.as_ptr()).collect();
        v.extend(
            out.policy_grads
                .iter()
                .chain(&out.value_grads)
                .map(|g| g.as_ptr()),
        );
        v.push(out.ratios.as_ptr());
        v
    };
    let before = ptrs(&ws, &out);
    loss_and_grads_into(&c.policy, &c.critic, &c.mb, &c.cfg, &mut ws, &mut out);
    assert_eq!(before, ptrs(&ws, &out));
}

#[test]
fn transpose_into_is_the_transpose() {
    // The definition of the transpose, wt[i][o] = w[o][i]; shapes with whole blocks of eight rows,
    // a ragged last block, and fewer rows than a block.
    for (rows, cols) in [(64, 48), (64, 64), (13, 5), (8, 1), (3, 7), (1, 1)] {
        let w: Vec<f32> = (0..rows * cols).map(|k| k as f32 + 0.5).collect();
        let mut wt = vec![f32::NAN; rows * cols];
        super::transpose_into(&w, rows, cols, &mut wt);
        for o in 0..rows {
            for i in 0..cols {
                assert_eq!(
                    wt[i * rows + o],
                    w[o * cols + i],
                    "{rows}x{cols} at ({o}, {i})"
                );
            }
        }
    }
}
