//! Solid contact checked against the laws of frictionless, perfectly inelastic impact and static equilibrium:
//! energy never rises across a contact, the normal speed at the contact ends at zero while the motion the
//! contact does not resist is kept, an arm pushed into a disc rests on its surface with the contact balancing the
//! torque, a moving disc pushes a resting link without penetrating it, and free-space motion is untouched.
#![allow(clippy::needless_range_loop)]

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::sync::Arc;
use termwise::sim::contact::{
    detect, jacobian_row, resolve_velocities, Contacts, Surroundings, MAX_PENETRATION,
};
use termwise::sim::{ArmEnv, ArmState, Scenario, Shape, MAX_JOINTS};
use termwise::task::observation::{clearance_obs_dim, observe_clearance};

/// A scenario text: `links` uniform rods (length, mass, radius), no gravity, no limits worth hitting.
fn scenario(links: &[(f64, f64, f64)], control: &str, extra: &str) -> Arc<Scenario> {
    let mut src = format!("[arm]\ncontrol = \"{control}\"\ngravity = 0.0\n");
    for (l, m, r) in links {
        src += &format!(
            "[[arm.link]]\nlength = {l}\nmass = {m}\nradius = {r}\ntau_max = 1000.0\nacc_max = 1000.0\nv_max = 100.0\n"
        );
    }
    let zeros = vec!["0.0"; links.len()].join(", ");
    src += &format!(
        "[physics]\nintegrator = \"rk4\"\ndt = 0.001\nsubsteps = 10\nhorizon = 100000\n\
         [workspace]\nmin = [-3.0, -3.0]\nmax = [3.0, 3.0]\n[start]\nq = [{zeros}]\n[goal]\nposition = [0.0, 0.6]\n{extra}"
    );
    Arc::new(Scenario::from_toml_str(&src, "contact-test").unwrap())
}

fn kinetic_energy(sc: &Scenario, q: &[f64], dq: &[f64]) -> f64 {
    // With gravity 0 the arm's energy is all kinetic (T = dq^T M dq / 2).
    sc.arm.energy(q, dq)
}

fn contacts_of(
    sc: &Scenario,
    q: &[f64; MAX_JOINTS],
    shapes: &[Shape],
) -> (Contacts, [[f64; 2]; MAX_JOINTS + 1]) {
    let mut pts = [[0.0; 2]; MAX_JOINTS + 1];
    sc.arm.joint_points(q, &mut pts);
    let world = Surroundings {
        shapes,
        velocities: &[],
        workspace_min: sc.workspace_min,
        workspace_max: sc.workspace_max,
        self_collision: false,
    };
    let mut cs = Contacts::default();
    detect(&sc.arm, &pts, &world, &mut cs);
    (cs, pts)
}

/// Determinant of the Gram matrix R R^T of the rows (zero when they are linearly dependent), by elimination.
fn gram_determinant(rows: &[[f64; MAX_JOINTS]]) -> f64 {
    let m = rows.len();
    let mut g = vec![vec![0.0; m]; m];
    for a in 0..m {
        for b in 0..m {
            g[a][b] = (0..MAX_JOINTS).map(|i| rows[a][i] * rows[b][i]).sum();
        }
    }
    let mut det = 1.0;
    for k in 0..m {
        let p = g[k][k];
        if p.abs() < 1e-300 {
            return 0.0;
        }
        det *= p;
        for r in k + 1..m {
            let f = g[r][k] / p;
            for c in k..m {
                g[r][c] -= f * g[k][c];
            }
        }
    }
    det
}

#[test]
fn kinetic_energy_never_rises_across_a_contact() {
    // A frictionless, perfectly inelastic impulse dissipates T: with w = v + A lambda complementary to lambda,
    // dT = lambda^T v + lambda^T A lambda / 2 = -lambda^T A lambda / 2 <= 0 (Mirtich 1996, "Impulse-based dynamic
    // simulation of rigid body systems", ch. 3; Featherstone 2008, "Rigid Body Dynamics Algorithms", sec. 11.4).
    let sc = scenario(
        &[(0.5, 1.2, 0.03), (0.4, 0.8, 0.03), (0.3, 0.5, 0.025)],
        "torque",
        "",
    );
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let mut impacts = 0;
    let mut jammed = 0;
    for _ in 0..2000 {
        let mut q = [0.0; MAX_JOINTS];
        let mut dq = [0.0; MAX_JOINTS];
        for i in 0..3 {
            q[i] = rng.gen_range(-3.0..3.0);
            dq[i] = rng.gen_range(-4.0..4.0);
        }
        let mut pts = [[0.0; 2]; MAX_JOINTS + 1];
        sc.arm.joint_points(&q, &mut pts);
        // Up to three discs placed so they overlap random points of the arm.
        let mut shapes = Vec::new();
        for _ in 0..rng.gen_range(1..=3) {
            let i = rng.gen_range(0..3);
            let t: f64 = rng.gen();
            let p = [
                pts[i][0] + t * (pts[i + 1][0] - pts[i][0]) + rng.gen_range(-0.08..0.08),
                pts[i][1] + t * (pts[i + 1][1] - pts[i][1]) + rng.gen_range(-0.08..0.08),
            ];
            shapes.push(Shape::Disc {
                center: p,
                radius: rng.gen_range(0.03..0.1),
            });
        }
        let (cs, pts) = contacts_of(&sc, &q, &shapes);
        if cs.len == 0 {
            continue;
        }
        impacts += 1;
        let before = kinetic_energy(&sc, &q[..3], &dq[..3]);
        resolve_velocities(&sc.arm, &q, &mut dq, &pts, &cs);
        let after = kinetic_energy(&sc, &q[..3], &dq[..3]);
        assert!(
            after <= before * (1.0 + 1e-9) + 1e-12,
            "energy rose: {before} -> {after}"
        );
        // And no contact approaches afterwards (the complementarity condition), also for jammed, redundant
        // contact sets (more contacts than joints, discs pressing one link from opposite sides).
        let rows: Vec<_> = cs
            .as_slice()
            .iter()
            .map(|c| jacobian_row(&pts, c))
            .collect();
        for row in &rows {
            let vn: f64 = (0..3).map(|i| row[i] * dq[i]).sum();
            assert!(vn >= -1e-9, "contact still approaching at {vn} m/s");
        }
        jammed += (rows.len() > 3 || gram_determinant(&rows) <= 1e-8) as usize;
    }
    assert!(jammed > 100, "only {jammed} jammed cases");
    assert!(impacts > 1000, "only {impacts} random cases touched a disc");
}

#[test]
fn a_link_swung_into_a_disc_stops_along_the_normal_and_keeps_the_rest_of_its_motion() {
    // Two links; the second swings into a disc. After a frictionless inelastic impact (restitution 0) the
    // normal speed at the contact is zero, and the impulse acts only along J^T, so the momentum of every motion
    // u the contact does not resist (J u = 0) is unchanged: u^T M dq+ = u^T M dq- (Featherstone 2008, sec. 11.4,
    // the impulsive equations M (dq+ - dq-) = J^T lambda with J dq+ = 0). For one contact the closed form is
    // dq+ = dq- - M^-1 J^T (J M^-1 J^T)^-1 J dq- (same section); the solver must match it.
    let sc = scenario(&[(0.5, 1.2, 0.03), (0.4, 0.8, 0.03)], "torque", "");
    let q = [0.4, 0.9, 0.0, 0.0, 0.0, 0.0];
    let mut pts = [[0.0; 2]; MAX_JOINTS + 1];
    sc.arm.joint_points(&q, &mut pts);
    // A disc overlapping the middle of link 2 by 2 mm, on the side it swings towards (positive rotation).
    let mid = [0.5 * (pts[1][0] + pts[2][0]), 0.5 * (pts[1][1] + pts[2][1])];
    let th = q[0] + q[1];
    let side = [-th.sin(), th.cos()]; // direction of motion of link 2 under positive dq
    let radius = 0.06;
    let gap = 0.03 + radius - 0.002;
    let disc = Shape::Disc {
        center: [mid[0] + gap * side[0], mid[1] + gap * side[1]],
        radius,
    };
    let (cs, pts) = contacts_of(&sc, &q, &[disc]);
    assert_eq!(cs.len, 1);
    let c = cs.as_slice()[0];
    let j = jacobian_row(&pts, &c);
    let mut dq = [1.5, 2.0, 0.0, 0.0, 0.0, 0.0];
    let vn_before = j[0] * dq[0] + j[1] * dq[1];
    assert!(
        vn_before < -0.1,
        "the link must approach the disc, vn = {vn_before}"
    );
    let mut m = [[0.0; MAX_JOINTS]; MAX_JOINTS];
    sc.arm.mass_matrix(&q[..2], &mut m);
    let before = dq;
    resolve_velocities(&sc.arm, &q, &mut dq, &pts, &cs);
    let vn_after = j[0] * dq[0] + j[1] * dq[1];
    assert!(
        vn_after.abs() < 1e-9,
        "normal speed after impact {vn_after}"
    );
    // Momentum along the unresisted direction u (2 links, one contact: u = (-J1, J0)).
    let u = [-j[1], j[0]];
    let p = |v: &[f64; MAX_JOINTS]| -> f64 {
        (0..2)
            .map(|a| (0..2).map(|b| u[a] * m[a][b] * v[b]).sum::<f64>())
            .sum()
    };
    assert!((p(&dq) - p(&before)).abs() < 1e-9 * p(&before).abs().max(1.0));
    assert!(
        p(&before).abs() > 1e-3,
        "the check needs tangential motion to keep"
    );
    // Closed form: dq+ = dq - M^-1 J^T (J M^-1 J^T)^-1 J dq, with the 2 x 2 inverse written out.
    let det = m[0][0] * m[1][1] - m[0][1] * m[1][0];
    let minv = [
        [m[1][1] / det, -m[0][1] / det],
        [-m[1][0] / det, m[0][0] / det],
    ];
    let w = [
        minv[0][0] * j[0] + minv[0][1] * j[1],
        minv[1][0] * j[0] + minv[1][1] * j[1],
    ];
    let a = j[0] * w[0] + j[1] * w[1];
    for i in 0..2 {
        let expected = before[i] - w[i] * vn_before / a;
        assert!(
            (dq[i] - expected).abs() < 1e-9,
            "joint {i}: {} vs {expected}",
            dq[i]
        );
    }
}

#[test]
fn an_arm_pushed_by_constant_torque_rests_on_the_disc_and_the_contact_balances_the_torque() {
    // One link driven by a constant torque into a disc (torque control, no gravity, no damping). It must come to
    // rest on the disc's surface with penetration <= 1 mm, and at rest the mean contact torque J^T lambda / dt
    // balances the applied torque: tau + J^T lambda / dt = 0 (static equilibrium of the frictionless contact,
    // Featherstone 2008, sec. 11.2).
    let extra = "[[obstacle]]\nshape = \"disc\"\ncenter = [0.3, 0.2]\nradius = 0.08\n";
    let sc = scenario(&[(0.6, 1.0, 0.03)], "torque", extra);
    let mut env = ArmEnv::new(sc.clone());
    env.reset(ArmState::at_rest(&[0.0]), [0.0, 0.9], 0);
    let tau = 0.7;
    let mut worst: f64 = 0.0;
    for _ in 0..300 {
        let r = env.step(&[tau]);
        worst = worst.max(-r.min_clearance);
    }
    let r = env.last_report();
    assert!(worst <= MAX_PENETRATION, "penetration reached {worst} m");
    assert!(r.collided, "the arm must be resting on the disc");
    assert!(
        r.min_clearance > -MAX_PENETRATION,
        "clearance {}",
        r.min_clearance
    );
    assert!(r.dq[0].abs() < 1e-6, "not at rest: {}", r.dq[0]);
    // Where the link touches the disc: distance from the disc centre to the link's line = 0.03 + 0.08.
    let expected_angle = (0.2f64).atan2(0.3) - ((0.03 + 0.08) / (0.3f64.hypot(0.2))).asin();
    assert!(
        (r.q[0] - expected_angle).abs() < 3e-3,
        "rests at {} rad, surface contact at {expected_angle} rad",
        r.q[0]
    );
    let mean_contact_torque = env.contact_impulse()[0] / sc.control_dt();
    assert!(
        (mean_contact_torque + tau).abs() < 1e-6 * tau,
        "contact torque {mean_contact_torque} vs applied {tau}"
    );
}

#[test]
fn a_moving_disc_pushes_a_resting_link_without_penetrating_it() {
    // A disc moving at 0.3 m/s sweeps into a link at rest: the link must be pushed (it gains the speed of the
    // disc's surface along the normal) and never overlap the disc by more than the tolerance.
    let extra = "[[obstacle]]\nshape = \"disc\"\ncenter = [0.45, 0.25]\nradius = 0.07\nmotion = \"linear\"\nvelocity = [0.0, -0.3]\n";
    let sc = scenario(&[(0.6, 1.0, 0.03)], "torque", extra);
    let mut env = ArmEnv::new(sc.clone());
    env.reset(ArmState::at_rest(&[0.0]), [0.0, 0.9], 0);
    let mut worst: f64 = 0.0;
    let mut touched = false;
    for _ in 0..100 {
        let r = env.step(&[0.0]);
        worst = worst.max(-r.min_clearance);
        touched |= r.collided;
    }
    let r = env.last_report();
    assert!(touched, "the disc never reached the link");
    assert!(worst <= MAX_PENETRATION, "penetration reached {worst} m");
    assert!(
        r.q[0] < -0.1,
        "the link was not pushed down: q = {}",
        r.q[0]
    );
    assert!(
        r.dq[0] < 0.0,
        "the link must move with the disc: dq = {}",
        r.dq[0]
    );
}

#[test]
fn solid_obstacles_stop_an_arm_that_would_pass_through() {
    // Pass-through mode (the old behaviour) lets a driven arm through the disc; solid mode keeps it outside.
    let disc = "[[obstacle]]\nshape = \"disc\"\ncenter = [0.35, 0.35]\nradius = 0.08\n";
    for (mode, expect_through) in [("pass-through", true), ("solid", false)] {
        let sc = scenario(&[(0.6, 1.0, 0.03), (0.4, 0.6, 0.03)], "acceleration", disc);
        let mut sc2 = (*sc).clone();
        sc2.contact = if mode == "solid" {
            termwise::sim::ContactMode::Solid
        } else {
            termwise::sim::ContactMode::PassThrough
        };
        let mut env = ArmEnv::new(Arc::new(sc2));
        env.reset(ArmState::at_rest(&[0.0, 0.0]), [0.0, 0.9], 0);
        let mut worst: f64 = 0.0;
        for _ in 0..150 {
            let r = env.step(&[3.0, 0.0]);
            worst = worst.max(-r.min_clearance);
        }
        if expect_through {
            assert!(
                worst > 0.05,
                "{mode}: expected deep penetration, got {worst}"
            );
        } else {
            assert!(worst <= MAX_PENETRATION, "{mode}: penetration {worst}");
        }
    }
}

#[test]
fn free_space_motion_is_bit_for_bit_the_same_in_both_modes() {
    // Where no contact occurs, solid mode must not change a single bit of the dynamics.
    let extra = "[[obstacle]]\nshape = \"disc\"\ncenter = [-1.5, -1.5]\nradius = 0.1\n";
    let base = scenario(&[(0.5, 1.2, 0.03), (0.4, 0.8, 0.03)], "torque", extra);
    let mut pass = (*base).clone();
    pass.contact = termwise::sim::ContactMode::PassThrough;
    let mut a = ArmEnv::new(base.clone());
    let mut b = ArmEnv::new(Arc::new(pass));
    a.reset(ArmState::at_rest(&[0.2, 0.3]), [0.0, 0.9], 0);
    b.reset(ArmState::at_rest(&[0.2, 0.3]), [0.0, 0.9], 0);
    for k in 0..200 {
        let u = [(k as f64 * 0.1).sin() * 2.0, (k as f64 * 0.07).cos()];
        let ra = a.step(&u);
        let rb = b.step(&u);
        assert!(!ra.collided);
        assert_eq!(ra.q, rb.q);
        assert_eq!(ra.dq, rb.dq);
    }
}

#[test]
fn solid_boundary_and_boxes_hold_too() {
    // An arm driven towards a box and the workspace wall stays within the tolerance of both.
    let extra = "[[obstacle]]\nshape = \"box\"\ncenter = [0.0, 0.75]\nhalf = [0.15, 0.06]\n";
    let src_ws = scenario(&[(0.5, 1.2, 0.03), (0.4, 0.8, 0.03)], "acceleration", extra);
    let mut sc = (*src_ws).clone();
    sc.workspace_min = [-0.8, -0.8];
    sc.workspace_max = [0.8, 0.8];
    let mut env = ArmEnv::new(Arc::new(sc));
    env.reset(ArmState::at_rest(&[-1.5, 1.0]), [0.0, 0.6], 0);
    assert!(!env.last_report().collided, "the start must be free");
    let mut worst: f64 = 0.0;
    let mut touched = 0;
    for k in 0..400 {
        let u = if k < 200 { [8.0, 0.0] } else { [-8.0, 4.0] };
        let r = env.step(&u);
        worst = worst.max(-r.min_clearance);
        touched += r.collided as usize;
    }
    assert!(
        touched > 20,
        "the arm touched something in only {touched} steps"
    );
    assert!(worst <= MAX_PENETRATION, "penetration {worst}");
}

/// The clearance entries of the observation (`task::observation::observe_clearance`): each link's distance to
/// the nearest disc and the joint-space gradient of the smallest, against the closed form. For a disc of centre c and radius R and
/// a link capsule of radius r whose segment point nearest to c is p, the clearance is |p - c| - R - r and its
/// derivative along joint j (a joint that moves p) is n . (z x (p - p_j)) with n = (p - c) / |p - c|: the planar
/// Jacobian column z x (p - p_j) (Siciliano et al. 2009, Robotics: Modelling, Planning and Control, eq. 3.30)
/// projected on the distance's gradient, as in the obstacle avoidance of Khatib 1986 (IJRR 5(1), eq. 14).
#[test]
fn clearance_observation_matches_the_closed_form_distance_and_its_joint_gradient() {
    let sc = scenario(
        &[(0.5, 1.0, 0.03), (0.4, 1.0, 0.025)],
        "acceleration",
        "[[obstacle]]\nshape = \"disc\"\ncenter = [0.55, 0.45]\nradius = 0.1\n\
         [[obstacle]]\nshape = \"disc\"\ncenter = [-0.6, -0.5]\nradius = 0.05\n",
    );
    let mut env = ArmEnv::new(sc.clone());
    let q = [0.35, 0.9];
    env.reset(ArmState::at_rest(&q), [0.0, 0.6], 0);
    let mut out = vec![0.0f32; clearance_obs_dim(&env)];
    observe_clearance(&env, &mut out);
    let reach = 0.9;
    let mut pts = [[0.0; 2]; MAX_JOINTS + 1];
    sc.arm.joint_points(&q, &mut pts);
    // Closed form per link: nearest point on the segment to each disc centre.
    let discs = [([0.55, 0.45], 0.1), ([-0.6, -0.5], 0.05)];
    let radii = [0.03, 0.025];
    let mut best = (f64::INFINITY, 0usize, [0.0; 2], [0.0; 2]);
    for link in 0..2 {
        let (a, b) = (pts[link], pts[link + 1]);
        let mut link_min = f64::INFINITY;
        for &(c, r) in &discs {
            let ab = [b[0] - a[0], b[1] - a[1]];
            let t = (((c[0] - a[0]) * ab[0] + (c[1] - a[1]) * ab[1])
                / (ab[0] * ab[0] + ab[1] * ab[1]))
                .clamp(0.0, 1.0);
            let p = [a[0] + t * ab[0], a[1] + t * ab[1]];
            let d = ((p[0] - c[0]).powi(2) + (p[1] - c[1]).powi(2)).sqrt() - r - radii[link];
            link_min = link_min.min(d);
            if d < best.0 {
                best = (d, link, p, c);
            }
        }
        assert!(
            (out[link] as f64 - (link_min / reach).min(1.0)).abs() < 1e-6,
            "link {link}: observed {} vs closed form {}",
            out[link],
            link_min / reach
        );
    }
    let (_, link, p, c) = best;
    let len = ((p[0] - c[0]).powi(2) + (p[1] - c[1]).powi(2)).sqrt();
    let nrm = [(p[0] - c[0]) / len, (p[1] - c[1]) / len];
    for j in 0..2 {
        // Joints beyond the nearest point's link do not move it.
        let g = if j <= link {
            let r = [p[0] - pts[j][0], p[1] - pts[j][1]];
            nrm[0] * -r[1] + nrm[1] * r[0]
        } else {
            0.0
        };
        assert!(
            (out[2 + j] as f64 - g / reach).abs() < 1e-4,
            "joint {j}: observed gradient {} vs closed form {}",
            out[2 + j],
            g / reach
        );
    }
    // The nearest pair here is the second link and the first disc, so both joints move it.
    assert_eq!(link, 1);
    assert!(out[2].abs() > 1e-3 && out[3].abs() > 1e-3);
}

/// The contact certificate (`ArmEnv::step` skips resolving substeps that stay within the clearance of the control
/// step's start) must change no bit of any trajectory: the same arms driven into still and moving discs, a box,
/// the workspace wall and themselves, stepped with the certificate on and off, give identical states, clearances
/// and contact flags at every step. A definition check of an exact shortcut: no outside source applies.
#[test]
fn the_contact_certificate_changes_no_bit_of_any_trajectory() {
    let still = "[[obstacle]]\nshape = \"disc\"\ncenter = [0.35, 0.35]\nradius = 0.08\n\
                 [[obstacle]]\nshape = \"box\"\ncenter = [-0.3, 0.6]\nhalf = [0.12, 0.05]\n";
    let moving =
        "[[obstacle]]\nshape = \"disc\"\ncenter = [0.45, 0.2]\nradius = 0.07\nmotion = \"sine\"\n\
                  amplitude = [0.2, 0.1]\nperiod = 0.7\n";
    let two = [(0.6, 1.0, 0.03), (0.4, 0.6, 0.03)];
    let three = [(0.5, 1.0, 0.03), (0.4, 0.7, 0.03), (0.35, 0.5, 0.03)];
    let cases: Vec<(&str, Scenario)> = vec![
        (
            "still, acceleration",
            (*scenario(&two, "acceleration", still)).clone(),
        ),
        ("still, torque", (*scenario(&two, "torque", still)).clone()),
        (
            "moving disc",
            (*scenario(&two, "acceleration", moving)).clone(),
        ),
        ("walls", {
            let mut sc = (*scenario(&two, "acceleration", still)).clone();
            sc.workspace_min = [-0.7, -0.7];
            sc.workspace_max = [0.7, 0.7];
            sc
        }),
        ("three links, self-collision", {
            let mut sc = (*scenario(&three, "acceleration", still)).clone();
            sc.self_collision = true;
            sc
        }),
    ];
    for (name, sc) in cases {
        let sc = Arc::new(sc);
        let n = sc.n();
        let mut on = ArmEnv::new(sc.clone());
        let mut off = ArmEnv::new(sc.clone());
        off.set_contact_certificate(false);
        let start = ArmState::at_rest(&[0.1, 0.2, -0.3][..n]);
        on.reset(start, [0.0, 0.9], 0);
        off.reset(start, [0.0, 0.9], 0);
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        let (mut touched, mut free) = (0, 0);
        let mut push = [0.0; MAX_JOINTS];
        let scale = if name.contains("torque") { 4.0 } else { 15.0 };
        for k in 0..1500 {
            // Random pushes held for 50 steps (0.5 s): long enough to reach and lean on an obstacle.
            if k % 50 == 0 {
                for x in push.iter_mut().take(n) {
                    *x = rng.gen_range(-1.0..1.0) * scale;
                }
            }
            let u: Vec<f64> = (0..n).map(|i| push[i] + (k as f64 * 0.05).sin()).collect();
            let (a, b) = (on.step(&u), off.step(&u));
            assert_eq!((a.q, a.dq), (b.q, b.dq), "{name}: step {k}");
            assert_eq!(
                (a.min_clearance.to_bits(), a.collided),
                (b.min_clearance.to_bits(), b.collided),
                "{name}: step {k}"
            );
            touched += a.collided as usize;
            free += (a.min_clearance > 0.05) as usize;
        }
        // Both regimes must have been exercised: contact, and substeps far enough from it to be skipped.
        assert!(
            touched > 10,
            "{name}: the arm touched something in only {touched} steps"
        );
        assert!(free > 10, "{name}: only {free} steps away from contact");
    }
}
