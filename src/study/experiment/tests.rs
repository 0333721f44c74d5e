//! Unit tests of experiment parsing helpers.

use super::*;

#[test]
fn fnv1a_known_value() {
    // FNV-1a 64 of "a" is 0xaf63dc4c8601ec8c (Fowler/Noll/Vo reference test vectors, from memory);
    // our variant appends a separator byte per part, so check the raw algorithm on one part without it.
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    h ^= b'a' as u64;
    h = h.wrapping_mul(0x0000_0100_0000_01b3);
    assert_eq!(h, 0xaf63_dc4c_8601_ec8c);
    assert_ne!(fnv1a_hex(&[b"ab"]), fnv1a_hex(&[b"a", b"b"]));
}

#[test]
fn merge_and_diff() {
    let mut base: Table =
        toml::from_str("[reward.time]\nweight = 1.0\ncost = 0.01\n[reward.goal]\nweight = 1.0\n")
            .unwrap();
    let over: Table = toml::from_str("[reward.time]\nweight = 0.0\n").unwrap();
    let orig = base.clone();
    deep_merge(&mut base, &over);
    assert_eq!(base["reward"]["time"]["cost"].as_float(), Some(0.01));
    let d = diff(&orig, &base);
    assert_eq!(
        d,
        vec![Change {
            key: "reward.time.weight".into(),
            base: "1.0".into(),
            value: "0.0".into()
        }]
    );
}

#[test]
fn safe_names() {
    assert!(safe_name("without-waypoint_progress"));
    assert!(!safe_name("../etc"));
    assert!(!safe_name("a b"));
    assert!(!safe_name(""));
}

fn experiment_with(extra: &str) -> Result<Experiment, ConfigError> {
    let scenario = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/experiments/scenarios/table-2link-2obs.toml"
    );
    let src = format!(
        "[study]\nname = \"p\"\nseeds = 8\nbudget = 2048\n[scenario]\nfile = \"{scenario}\"\n[reward.goal]\n\
         [[variant]]\nname = \"a\"\n[[variant]]\nname = \"b\"\n{extra}"
    );
    parse(&src, Path::new("p.toml"))
}

#[test]
fn a_probe_scales_link_masses_with_the_uniform_rod_inertia_and_sets_damping() {
    // The scenario's links are uniform rods without an explicit inertia, so the scaled link keeps
    // I = m l^2 / 12 about its centre (uniform thin rod, any mechanics handbook) with the new mass.
    let e = experiment_with(
        "[[probe]]\nname = \"heavy\"\nlink_mass_factor = [1.0, 2.5]\nlink_damping = [0.2, 0.3]\n",
    )
    .unwrap();
    let p = &e.probes[0];
    assert_eq!(p.per_variant.len(), 2);
    let (sc, hash) = &p.per_variant[0];
    let base = &e.variants[0].scenario.arm.links;
    let links = &sc.arm.links;
    assert_eq!(links[0].mass, base[0].mass);
    assert_eq!(links[1].mass, 2.5 * base[1].mass);
    let rod = links[1].mass * links[1].length * links[1].length / 12.0;
    assert!(
        (links[1].inertia - rod).abs() < 1e-15,
        "{} vs {rod}",
        links[1].inertia
    );
    assert_eq!((links[0].damping, links[1].damping), (0.2, 0.3));
    // The same change on two variants with the same scenario is one definition.
    assert_eq!(hash, &p.per_variant[1].1);
    assert!(p.changes.iter().any(|c| c.contains("link masses")));
}

#[test]
fn a_probe_sets_still_obstacles_in_motion_with_spread_phases_and_adds_obstacles() {
    let e = experiment_with(
        "[[probe]]\nname = \"sway\"\nobstacle_motion = { motion = \"sine\", amplitude = [0.1, 0.0], period = 2.0 }\n\
         extra_obstacles = [{ shape = \"disc\", center = [-0.5, -0.4], radius = 0.08 }]\n",
    )
    .unwrap();
    let sc = &e.probes[0].per_variant[0].0;
    assert_eq!(sc.obstacles.len(), 3);
    let phases: Vec<String> = sc
        .obstacles
        .iter()
        .map(|o| format!("{:?}", o.motion))
        .collect();
    // Two still obstacles: phases 0 and pi (2 pi k / 2); the added one stays still.
    assert!(phases[0].contains("phase: 0.0"), "{phases:?}");
    assert!(
        phases[1].contains(&format!("phase: {}", std::f64::consts::PI)),
        "{phases:?}"
    );
    assert!(phases[2].contains("Still"), "{phases:?}");
}

#[test]
fn racing_rungs_become_seed_counts() {
    // Rung k decides after ceil(fraction x seeds) seeds: 0.5 and 0.75 of 8 seeds are 4 and 6.
    let e = experiment_with("[study.racing]\nrungs = [0.5, 0.75]\n").unwrap();
    let r = e.racing.unwrap();
    assert_eq!(r.rung_seeds, vec![4, 6]);
    assert_eq!((r.max_seeds, r.confidence), (16, 0.99));
    let e = experiment_with("[study.racing]\nrungs = [0.5, 0.45]\n").unwrap_err();
    assert_eq!(e.path, "study.racing.rungs[1]");
    assert!(e.message.contains("rungs must add seeds"), "{e}");
    let e = experiment_with("[study.racing]\nrungs = [0.5]\nmax_seeds = 7\n").unwrap_err();
    assert_eq!(e.path, "study.racing.max_seeds");
}
