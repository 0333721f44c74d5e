//! The words a user reads: `check`'s plan line and evaluation count, `status` on a published results
//! folder and on an unfinished one, and `replay` refusing an output folder that does not exist.
//! Each message is checked through the binary, as a user meets it.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_termwise"))
}

fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("termwise-msg-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn text(o: &Output) -> (String, String) {
    (
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

/// One learned variant and the controller; 8 envs x 64 steps = 512 env steps per iteration.
fn experiment(dir: &Path, budget: u32) -> PathBuf {
    let scen = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/experiments/scenarios/table-2link-2obs.toml"
    );
    let p = dir.join("exp.toml");
    std::fs::write(
        &p,
        format!(
            r#"
[study]
name = "msg"
seeds = 2
budget = {budget}
eval_every = 512
eval_episodes = 2
[scenario]
file = "{scen}"
[reward.goal]
bonus = 5.0
[reward.time]
[learner]
num_envs = 8
rollout_steps = 64
minibatch_size = 128
epochs = 1
[[variant]]
name = "learned"
[[variant]]
name = "controller"
kind = "baseline"
"#
        ),
    )
    .unwrap();
    p
}

#[test]
fn check_counts_variants_runs_and_evaluations_in_plain_words() {
    let d = scratch("check");
    // 1000 is not a multiple of 512: evaluations at 0, 512 and 1024 (the first step past the budget).
    let exp = experiment(&d, 1000);
    let o = bin()
        .args(["check", exp.to_str().unwrap(), "--no-calibrate"])
        .output()
        .unwrap();
    let (out, err) = text(&o);
    assert!(o.status.success(), "{err}");
    assert!(
        out.contains(
            "study `msg`: 1 learned variant x 2 seeds + 1 baseline controller (deterministic, 1 run each) = 3 runs"
        ),
        "{out}"
    );
    assert!(out.contains("3 evaluations of 2 episodes per run"), "{out}");
    // The count matches what a run writes.
    let res = d.join("res");
    let o = bin()
        .args([
            "run",
            exp.to_str().unwrap(),
            "--out",
            res.to_str().unwrap(),
            "--jobs",
            "1",
            "--no-report",
        ])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", text(&o).1);
    let rows = std::fs::read_to_string(res.join("learned/seed-0/evaluations.csv"))
        .unwrap()
        .lines()
        .count()
        - 1;
    assert_eq!(rows, 3);
    let _ = std::fs::remove_dir_all(&d);
}

fn study_json(dir: &Path) {
    let fixture = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/study-small/study.json"
    );
    std::fs::copy(fixture, dir.join("study.json")).unwrap();
}

#[test]
fn status_tells_a_published_summary_from_an_unfinished_study() {
    // A folder with study.json and the report but no run folders: what a repository ships.
    let d = scratch("published");
    study_json(&d);
    std::fs::write(d.join("summary.csv"), "variant\n").unwrap();
    let o = bin()
        .args(["status", d.to_str().unwrap()])
        .output()
        .unwrap();
    let (out, err) = text(&o);
    assert!(o.status.success(), "{err}");
    assert!(out.contains("a published result"), "{out}");
    assert!(!out.contains("sbatch"), "{out}");

    // No report and no Slurm scripts: suggest the local command, not a script that does not exist.
    std::fs::remove_file(d.join("summary.csv")).unwrap();
    let o = bin()
        .args(["status", d.to_str().unwrap()])
        .output()
        .unwrap();
    let out = text(&o).0;
    assert!(
        out.contains("to finish: run the study again with `termwise run FILE --out"),
        "{out}"
    );
    assert!(!out.contains("sbatch"), "{out}");

    // With the Slurm scripts written by `termwise slurm`, the sbatch line names the real script.
    std::fs::create_dir_all(d.join("slurm")).unwrap();
    std::fs::write(d.join("slurm/cells.sbatch"), "#!/bin/bash\n").unwrap();
    let o = bin()
        .args(["status", d.to_str().unwrap()])
        .output()
        .unwrap();
    let out = text(&o).0;
    assert!(out.contains("sbatch --array=0-"), "{out}");
    assert!(out.contains("cells.sbatch"), "{out}");
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn replay_refuses_an_output_folder_that_does_not_exist() {
    let d = scratch("replay");
    let exp = experiment(&d, 1024);
    let missing = d.join("no-such-folder").join("x.gif");
    let o = bin()
        .args([
            "replay",
            "--baseline",
            "--experiment",
            exp.to_str().unwrap(),
            "--variant",
            "controller",
            "--out",
            missing.to_str().unwrap(),
        ])
        .output()
        .unwrap();
    let (_, err) = text(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(err.contains("--out"), "{err}");
    assert!(err.contains("does not exist"), "{err}");
    assert!(!err.contains("IOError"), "{err}");
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn check_says_a_key_the_base_leaves_unset_is_at_its_default() {
    let d = scratch("unset");
    let exp = experiment(&d, 1024);
    let src = std::fs::read_to_string(&exp).unwrap()
        + "[[variant]]\nname = \"no-goal\"\n[variant.reward.goal]\nweight = 0.0\n";
    std::fs::write(&exp, src).unwrap();
    let o = bin()
        .args(["check", exp.to_str().unwrap(), "--no-calibrate"])
        .output()
        .unwrap();
    let (out, err) = text(&o);
    assert!(o.status.success(), "{err}");
    assert!(
        out.contains("reward.goal.weight = 0.0   (base: not set, so its default)"),
        "{out}"
    );
    assert!(!out.contains("(unset)"), "{out}");
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn check_reports_a_wrong_type_in_plain_words() {
    let d = scratch("type");
    let exp = experiment(&d, 1024);
    let src = std::fs::read_to_string(&exp)
        .unwrap()
        .replace("seeds = 2", "seeds = \"two\"");
    std::fs::write(&exp, src).unwrap();
    let o = bin()
        .args(["check", exp.to_str().unwrap(), "--no-calibrate"])
        .output()
        .unwrap();
    let (_, err) = text(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(err.contains("study.seeds"), "{err}");
    assert!(err.contains("expected a whole number"), "{err}");
    assert!(!err.contains("i64") && !err.contains("u32"), "{err}");
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn check_points_at_the_right_table_and_suggests_a_near_name() {
    let d = scratch("blame");
    // A bad value in the base table is the base's fault, not the first variant's.
    let exp = experiment(&d, 1024);
    let src = std::fs::read_to_string(&exp)
        .unwrap()
        .replace("[reward.time]\n", "[reward.time]\nweight = \"x\"\n");
    std::fs::write(&exp, &src).unwrap();
    let o = bin()
        .args(["check", exp.to_str().unwrap(), "--no-calibrate"])
        .output()
        .unwrap();
    let (_, err) = text(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(err.contains("reward.time.weight"), "{err}");
    assert!(!err.contains("in variant"), "{err}");
    // A misspelt curriculum kind in a variant: its own line, the variant named, a suggestion.
    let exp = experiment(&d, 1024);
    let src = std::fs::read_to_string(&exp).unwrap()
        + "[[variant]]\nname = \"starts\"\n[variant.curriculum]\nkind = \"revers\"\n";
    std::fs::write(&exp, &src).unwrap();
    let line = src.lines().position(|l| l.contains("\"revers\"")).unwrap() + 1;
    let o = bin()
        .args(["check", exp.to_str().unwrap(), "--no-calibrate"])
        .output()
        .unwrap();
    let (_, err) = text(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains(&format!("exp.toml:{line}:")),
        "line {line}: {err}"
    );
    assert!(err.contains("did you mean `reverse`?"), "{err}");
    assert!(err.contains("in variant `starts`"), "{err}");
    let _ = std::fs::remove_dir_all(&d);
}
