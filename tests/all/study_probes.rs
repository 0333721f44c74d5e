//! Probe conditions through the binary: the probe episodes are the same for every variant and seed (by their
//! digest), a probe that changes nothing repeats the training condition's last evaluation, `termwise probe`
//! adds probes to a finished study without retraining (the same rows as probing at the end of the runs, any
//! `--jobs`), only changed probes are evaluated again, and bad probe definitions are exit 2 with file, line
//! and key path.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use termwise::results::{read_evaluations, read_probes, ProbeRow};

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_termwise"))
}

fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("termwise-probes-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// The probes of the tests: one of each kind, and one that changes nothing.
const PROBES: &str = r#"
[[variant]]
name = "controller"
kind = "baseline"

[[probe]]
name = "unchanged"

[[probe]]
name = "jumps"
goal_jump_rate = 1.0

[[probe]]
name = "sway"
obstacle_motion = { motion = "sine", amplitude = [0.1, 0.0], period = 2.0 }

[[probe]]
name = "crowded"
extra_obstacles = [{ shape = "disc", center = [-0.5, -0.4], radius = 0.08 }]

[[probe]]
name = "heavy"
link_mass_factor = [1.0, 3.0]
link_damping = 0.3

[[probe]]
name = "noisy"
observation_noise = 0.05

[[probe]]
name = "folded"
start_region = { q_min = [-3.0, 1.5], q_max = [3.0, 2.5] }
"#;

fn run(exp: &Path, out: &Path, jobs: &str) -> Output {
    let o = bin()
        .args(["run", exp.to_str().unwrap(), "--out", out.to_str().unwrap()])
        .args(["--jobs", jobs, "--no-report"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    o
}

fn probe(out: &Path, exp: &Path, jobs: &str) -> String {
    let o = bin()
        .args(["probe", out.to_str().unwrap(), exp.to_str().unwrap()])
        .args(["--jobs", jobs, "--no-report"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// Every run folder of the tiny study with probes (2 learned variants x 2 seeds and the controller).
fn run_dirs(out: &Path) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = ["with-path", "without-path"]
        .iter()
        .flat_map(|n| (0..2).map(move |s| out.join(n).join(format!("seed-{s}"))))
        .collect();
    v.push(out.join("controller/seed-0"));
    v
}

#[test]
fn probe_episodes_are_the_same_for_every_variant_and_seed() {
    let d = scratch("same");
    let exp = crate::common::tiny_study(&d, "tiny.toml", PROBES);
    let out = d.join("out");
    run(&exp, &out, "2");
    let tables: Vec<Vec<ProbeRow>> = run_dirs(&out)
        .iter()
        .map(|r| read_probes(r).unwrap())
        .collect();
    let names = [
        "unchanged",
        "jumps",
        "sway",
        "crowded",
        "heavy",
        "noisy",
        "folded",
    ];
    for t in &tables {
        let got: Vec<&str> = t.iter().map(|r| r.probe.as_str()).collect();
        assert_eq!(got, names);
    }
    // The hash check: each probe's episode digest is one value across both variants, both seeds and the
    // controller; probes that draw other episodes (more obstacles, another start region) have other digests.
    for (k, name) in names.iter().enumerate() {
        let digests: Vec<&str> = tables
            .iter()
            .map(|t| t[k].episodes_digest.as_str())
            .collect();
        assert!(
            digests.iter().all(|x| *x == digests[0]),
            "{name}: {digests:?}"
        );
    }
    let digest = |k: usize| tables[0][k].episodes_digest.clone();
    assert_ne!(
        digest(0),
        digest(3),
        "an extra obstacle changes the episodes"
    );
    assert_ne!(
        digest(0),
        digest(6),
        "another start region changes the episodes"
    );
    // A probe that changes nothing is the training condition: the final policy's rows repeat its last
    // evaluation exactly (the same episodes and actions).
    for (dir, t) in run_dirs(&out).iter().zip(&tables) {
        let last = *read_evaluations(&dir.join("evaluations.csv"))
            .unwrap()
            .last()
            .unwrap();
        let same = &t[0];
        assert_eq!(
            same.success_rate.to_bits(),
            last.success_rate.to_bits(),
            "{}",
            dir.display()
        );
        assert_eq!(
            same.mean_return.to_bits(),
            last.mean_return.to_bits(),
            "{}",
            dir.display()
        );
        assert_eq!(same.rms_joint_acc.to_bits(), last.rms_joint_acc.to_bits());
        assert_eq!(same.env_steps, last.env_steps);
    }
    // The probes act: goal jumps replan, moving obstacles too, heavier links move otherwise.
    let learned = &tables[0];
    assert!(learned[1].replans > 0.0 && learned[2].replans > 0.0);
    assert_ne!(learned[4].rms_joint_acc, learned[0].rms_joint_acc);
    assert_ne!(
        learned[5].rms_joint_acc, learned[0].rms_joint_acc,
        "noise reaches the policy"
    );
    // The report draws the probe table and heat map.
    let o = bin()
        .args(["report", out.to_str().unwrap(), "--resamples", "50"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(
        html.contains("id=probe-table") && html.contains("Most robust"),
        "no probe section"
    );
    assert!(html.contains("id=\"chart-probes\"") && out.join("charts/probes.png").is_file());
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn probes_are_added_to_a_finished_study_without_retraining() {
    let d = scratch("add");
    let plain = crate::common::tiny_study(
        &d,
        "plain.toml",
        "[[variant]]\nname = \"controller\"\nkind = \"baseline\"\n",
    );
    let probed = crate::common::tiny_study(&d, "probed.toml", PROBES);
    let (late, early) = (d.join("late"), d.join("early"));
    run(&plain, &late, "1");
    assert!(!late.join("with-path/seed-0/probes.csv").exists());
    let kept = |dir: &Path| -> Vec<Vec<u8>> {
        [
            "evaluations.csv",
            "training.csv",
            "policy.safetensors",
            "run.json",
        ]
        .iter()
        .map(|f| std::fs::read(dir.join("with-path/seed-1").join(f)).unwrap())
        .collect()
    };
    let before = kept(&late);
    let text = probe(&late, &probed, "2");
    assert!(text.contains("5 runs probed (35 evaluations)"), "{text}");
    assert_eq!(kept(&late), before, "probing retrains nothing");
    // The same rows as probing at the end of each run, with another worker count.
    run(&probed, &early, "1");
    for (a, b) in run_dirs(&late).iter().zip(run_dirs(&early)) {
        assert_eq!(
            std::fs::read(a.join("probes.csv")).unwrap(),
            std::fs::read(b.join("probes.csv")).unwrap(),
            "{}",
            a.display()
        );
    }
    // Probing again evaluates nothing; a changed probe is evaluated again, the others are kept.
    let text = probe(&late, &probed, "2");
    assert!(
        text.contains("0 runs probed") && text.contains("5 already had every probe"),
        "{text}"
    );
    let changed = d.join("changed.toml");
    let t = std::fs::read_to_string(&probed)
        .unwrap()
        .replace("goal_jump_rate = 1.0", "goal_jump_rate = 2.0");
    std::fs::write(&changed, t).unwrap();
    let text = probe(&late, &changed, "1");
    assert!(text.contains("5 runs probed (5 evaluations)"), "{text}");
    let study: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(late.join("study.json")).unwrap()).unwrap();
    assert_eq!(study["probes"].as_array().unwrap().len(), 7);
    // A published folder (study.json without run folders) has nothing to probe: refused, nothing rewritten.
    let published = d.join("published");
    std::fs::create_dir_all(&published).unwrap();
    std::fs::copy(late.join("study.json"), published.join("study.json")).unwrap();
    let before = std::fs::read(published.join("study.json")).unwrap();
    let o = bin()
        .args([
            "probe",
            published.to_str().unwrap(),
            probed.to_str().unwrap(),
        ])
        .output()
        .unwrap();
    assert_eq!(
        o.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert!(String::from_utf8_lossy(&o.stderr).contains("no finished run here to probe"));
    assert_eq!(std::fs::read(published.join("study.json")).unwrap(), before);
    // A probe file for another study is refused before anything is evaluated.
    let other = d.join("other.toml");
    let t = std::fs::read_to_string(&probed)
        .unwrap()
        .replace("name = \"tiny\"", "name = \"other\"");
    std::fs::write(&other, t).unwrap();
    let o = bin()
        .args([
            "probe",
            late.to_str().unwrap(),
            other.to_str().unwrap(),
            "--no-report",
        ])
        .output()
        .unwrap();
    assert_eq!(
        o.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn bad_probe_definitions_name_file_line_and_key() {
    let d = scratch("bad");
    let cases = [
        ("[[probe]]\nname = \"m\"\nlink_mass_factor = [1.0]\n", "probe[0].link_mass_factor: has 1 values for an arm with 2 joints"),
        ("[[probe]]\nname = \"m\"\nlink_mass_factor = -2.0\n", "probe[0].link_mass_factor: factors must be in (0, 100]"),
        ("[[probe]]\nname = \"d\"\nlink_damping = [0.1, -1.0]\n", "probe[0].link_damping: damping must be finite and >= 0"),
        ("[[probe]]\nname = \"a\"\n[[probe]]\nname = \"a\"\n", "probe[1].name: duplicate probe name `a`"),
        ("[[probe]]\nname = \"n\"\nobservation_noise = -0.1\n", "probe[0].observation_noise: must be a standard deviation"),
        ("[[probe]]\nname = \"s\"\nstart_region = { q_min = [0.0, 1.0], q_max = [0.5, 0.5] }\n", "probe[0].start_region: joint 2"),
        ("[[probe]]\nname = \"s\"\nstart_region = { q_min = [0.0], q_max = [0.5] }\n", "probe[0].start_region: has 1 joints"),
        ("[[probe]]\nname = \"o\"\nobstacle_motion = { motion = \"sine\", speed = 1.0 }\n", "probe[0].obstacle_motion: `speed` is not a motion key"),
        ("[[probe]]\nname = \"o\"\nobstacle_motion = { motion = \"sine\" }\n", "probe[0].obstacle_motion: makes an invalid scenario for variant `with-path`"),
        ("[[probe]]\nname = \"x\"\nextra_obstacles = [{ shape = \"disc\", center = [0.5, 0.5], radius = -0.1 }]\n", "probe[0].extra_obstacles: makes an invalid scenario"),
        ("[[probe]]\nname = \"j\"\ngoal_jump_rate = 50.0\n", "probe[0].goal_jump_rate: makes an invalid scenario"),
        ("[[probe]]\nname = \"k\"\nscenario = { arm = { control = \"torque\" } }\n", "probe[0].scenario:"),
        ("[[probe]]\nname = \"u\"\ngoal_jump_rte = 1.0\n", "unknown field `goal_jump_rte`"),
        ("[[probe]]\nname = \"e\"\nepisodes = 0\n", "probe[0].episodes: must be in 1..=10000"),
    ];
    for (extra, needle) in cases {
        let exp = crate::common::tiny_study(&d, "bad.toml", extra);
        let out = d.join("never");
        let o = bin()
            .args([
                "run",
                exp.to_str().unwrap(),
                "--out",
                out.to_str().unwrap(),
                "--no-report",
            ])
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{extra}: {err}");
        assert!(err.contains(needle), "{needle}: {err}");
        // file:line: key path: reason, on one line.
        let text = std::fs::read_to_string(&exp).unwrap();
        let line = text
            .lines()
            .position(|l| l.starts_with("[[probe]]"))
            .unwrap()
            + 1;
        let after = err.split("bad.toml:").nth(1).unwrap_or("");
        let shown: usize = after.split(':').next().unwrap_or("0").parse().unwrap_or(0);
        assert!(shown >= line, "{err} (probe starts at line {line})");
        assert_eq!(err.trim().lines().count(), 1, "{err}");
        assert!(!out.exists());
    }
    let _ = std::fs::remove_dir_all(&d);
}
