//! Integration tests of `termwise slurm` (the batch scripts it writes, and the submit script's job chaining,
//! driven through a stand-in `sbatch`) and of `termwise status` on a results folder filled by real cells.
//! The full cluster test (a real Slurm on localhost) is tests/slurm/run_slurm_test.sh.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("termwise-test-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// A tiny experiment: 2 variants x 2 seeds, 1024 steps per run.
fn tiny_experiment(dir: &Path) -> PathBuf {
    let scenario =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("experiments/scenarios/reach-2link.toml");
    let text = format!(
        r#"[study]
name = "tiny"
seeds = 2
budget = 1024
eval_every = 512
eval_episodes = 2
reference = "base"

[scenario]
file = "{}"

[reward.goal]
bonus = 5.0
[reward.acceleration]
weight = 1.0

[learner]
num_envs = 4
rollout_steps = 64

[[variant]]
name = "base"

[[variant]]
name = "no-acc"
[variant.reward.acceleration]
weight = 0.0
"#,
        scenario.display()
    );
    let p = dir.join("tiny.toml");
    std::fs::write(&p, text).unwrap();
    p
}

fn termwise(args: &[&str], path_prefix: Option<&Path>) -> Output {
    let mut c = Command::new(env!("CARGO_BIN_EXE_termwise"));
    c.args(args);
    if let Some(p) = path_prefix {
        c.env(
            "PATH",
            format!(
                "{}:{}",
                p.display(),
                std::env::var("PATH").unwrap_or_default()
            ),
        );
    }
    c.output().unwrap()
}

fn stdout(o: &Output) -> String {
    assert!(
        o.status.success(),
        "failed: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8(o.stdout.clone()).unwrap()
}

#[test]
fn slurm_scripts_and_status_follow_the_plan() {
    let dir = scratch("slurm");
    let exp = tiny_experiment(&dir);
    let out = dir.join("results");
    let (exp_s, out_s) = (exp.to_str().unwrap(), out.to_str().unwrap());
    let text = stdout(&termwise(
        &[
            "slurm",
            exp_s,
            "--out",
            out_s,
            "--max-parallel",
            "3",
            "--partition",
            "short",
            "--account",
            "lab",
            "--time",
            "0:30:00",
        ],
        None,
    ));
    assert!(text.contains("4 runs"), "{text}");
    let cells = std::fs::read_to_string(out.join("slurm/cells.sbatch")).unwrap();
    // The plan has 2 variants x 2 seeds = 4 runs: tasks 0..3, at most 3 at once.
    for line in [
        "#SBATCH --array=0-3%3",
        "#SBATCH --cpus-per-task=1",
        "#SBATCH --partition=short",
        "#SBATCH --account=lab",
        "#SBATCH --time=0:30:00",
        "#SBATCH --mem=2G",
    ] {
        assert!(
            cells.lines().any(|l| l == line),
            "missing {line:?} in\n{cells}"
        );
    }
    let exe = std::fs::canonicalize(env!("CARGO_BIN_EXE_termwise")).unwrap();
    let abs_out = std::fs::canonicalize(&out).unwrap();
    let run_line = format!(
        "exec '{}' run '{}' --out '{}' --cell \"$SLURM_ARRAY_TASK_ID\" --jobs 1 --no-report",
        exe.display(),
        std::fs::canonicalize(&exp).unwrap().display(),
        abs_out.display()
    );
    assert!(cells.contains(&run_line), "{cells}");
    let report = std::fs::read_to_string(out.join("slurm/report.sbatch")).unwrap();
    assert!(
        report.contains(&format!(
            "exec '{}' report '{}'",
            exe.display(),
            abs_out.display()
        )),
        "{report}"
    );
    assert!(out.join("study.json").is_file());

    // The submit script, against a stand-in sbatch that logs its arguments and answers like `--parsable`.
    let bin = dir.join("bin");
    std::fs::create_dir_all(&bin).unwrap();
    let log = dir.join("sbatch.log");
    let fake = format!(
        "#!/bin/bash\necho \"$*\" >> '{}'\nn=$(wc -l < '{}')\necho \"$((40 + n));cluster\"\n",
        log.display(),
        log.display()
    );
    let fake_path = bin.join("sbatch");
    std::fs::write(&fake_path, fake).unwrap();
    std::fs::set_permissions(
        &fake_path,
        std::os::unix::fs::PermissionsExt::from_mode(0o755),
    )
    .unwrap();
    let sub = Command::new("bash")
        .arg(out.join("slurm/submit.sh"))
        .env(
            "PATH",
            format!(
                "{}:{}",
                bin.display(),
                std::env::var("PATH").unwrap_or_default()
            ),
        )
        .output()
        .unwrap();
    assert!(
        sub.status.success(),
        "{}",
        String::from_utf8_lossy(&sub.stderr)
    );
    let calls = std::fs::read_to_string(&log).unwrap();
    let calls: Vec<&str> = calls.lines().collect();
    assert_eq!(calls.len(), 2, "{calls:?}");
    assert!(
        calls[0].starts_with("--parsable ") && calls[0].ends_with("cells.sbatch"),
        "{calls:?}"
    );
    assert!(
        calls[1].starts_with("--parsable --dependency=afterany:41 ")
            && calls[1].ends_with("report.sbatch"),
        "{calls:?}"
    );
    assert_eq!(
        std::fs::read_to_string(out.join("slurm/job-ids")).unwrap(),
        "cells 41\nreport 42\n"
    );

    // Nothing ran yet: every planned run is missing.
    let st = stdout(&termwise(&["status", out_s], None));
    assert!(
        st.contains("0 done, 0 running, 0 stale, 0 diverged, 0 interrupted, 4 missing"),
        "{st}"
    );
    assert!(st.contains("sbatch --array=0-3 "), "{st}");

    // One real cell (what array task 1 runs): variant-major plan, so cell 1 is `base` seed 1.
    stdout(&termwise(
        &["run", exp_s, "--out", out_s, "--cell", "1", "--no-report"],
        None,
    ));
    let st = stdout(&termwise(&["status", out_s], None));
    assert!(
        st.contains("1 done, 0 running, 0 stale, 0 diverged, 0 interrupted, 3 missing"),
        "{st}"
    );
    assert!(st.contains("sbatch --array=0,2-3 "), "{st}");
    let run_json = out.join("base/seed-1/run.json");
    let rec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&run_json).unwrap()).unwrap();
    assert_eq!(rec["status"], "done");
    assert_eq!(rec["env_steps"], 1024);

    // A run left `running` by a process that died long ago is stale, and is listed for a rerun.
    let mut dead = rec.clone();
    dead["status"] = "running".into();
    dead["heartbeat_unix"] = 1_000.into();
    std::fs::write(&run_json, serde_json::to_string(&dead).unwrap()).unwrap();
    let st = stdout(&termwise(&["status", out_s, "--stale-after", "600"], None));
    assert!(
        st.contains("0 done, 0 running, 1 stale, 0 diverged, 0 interrupted, 3 missing"),
        "{st}"
    );
    assert!(st.contains("cell   1: base seed 1: stale"), "{st}");
    assert!(st.contains("sbatch --array=0-3 "), "{st}");

    // Writing scripts again for the same folder is fine (a finished run is counted), a bad option is exit 2.
    std::fs::write(&run_json, serde_json::to_string(&rec).unwrap()).unwrap();
    let again = stdout(&termwise(&["slurm", exp_s, "--out", out_s], None));
    assert!(again.contains("4 runs (1 already finished)"), "{again}");
    let bad = termwise(&["slurm", exp_s, "--out", out_s, "--time", "4h"], None);
    assert_eq!(bad.status.code(), Some(2));
    let _ = std::fs::remove_dir_all(&dir);
}
