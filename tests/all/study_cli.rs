//! End-to-end checks of the study runner through the binary: reproducibility across worker counts, resume,
//! refusal to mix configurations, bad input (exit 2, nothing written), and replay reproducing the recorded
//! evaluation of a checkpoint.

use std::path::{Path, PathBuf};
use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_termwise"))
}

fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("termwise-study-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// A tiny study: 2 variants x 2 seeds, two rollouts of 8 x 64 steps per run.
fn tiny(dir: &Path, extra: &str) -> PathBuf {
    crate::common::tiny_study(dir, "tiny.toml", extra)
}

fn run(exp: &Path, out: &Path, jobs: &str) -> std::process::Output {
    bin()
        .args([
            "run",
            exp.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--jobs",
            jobs,
            "--no-report",
        ])
        .output()
        .unwrap()
}

#[test]
fn same_results_with_one_or_two_workers_and_resume_skips() {
    let d = scratch("jobs");
    let exp = tiny(&d, "");
    let (a, b) = (d.join("a"), d.join("b"));
    let o = run(&exp, &a, "1");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let o = run(&exp, &b, "2");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    for v in ["with-path", "without-path"] {
        for s in 0..2 {
            // training.csv (PPO's per-iteration figures) is reproducible too; training-speed.csv holds the
            // wall-clock speed and is the one run file that differs between repeats.
            let speed = a
                .join(v)
                .join(format!("seed-{s}"))
                .join("training-speed.csv");
            assert!(
                std::fs::read_to_string(&speed)
                    .unwrap()
                    .starts_with("iteration,env_steps,steps_per_s,rollout_s,update_s\n"),
                "{}",
                speed.display()
            );
            for f in ["evaluations.csv", "term_contributions.csv", "training.csv"] {
                let pa = a.join(v).join(format!("seed-{s}")).join(f);
                let x = std::fs::read(&pa).unwrap();
                assert_eq!(
                    x,
                    std::fs::read(b.join(v).join(format!("seed-{s}")).join(f)).unwrap(),
                    "{f} differs"
                );
                assert!(String::from_utf8_lossy(&x).lines().count() >= 3);
            }
        }
    }
    // Seeds differ from each other (the check can fail).
    assert_ne!(
        std::fs::read(a.join("with-path/seed-0/evaluations.csv")).unwrap(),
        std::fs::read(a.join("with-path/seed-1/evaluations.csv")).unwrap()
    );
    // A second run skips every finished run.
    let o = run(&exp, &a, "2");
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(
        text.contains("0 runs ran") && text.contains("4 already finished"),
        "{text}"
    );
    // The report has a training-health panel and chart from the runs' training.csv.
    let o = bin()
        .args(["report", a.to_str().unwrap(), "--resamples", "50"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let html = std::fs::read_to_string(a.join("report.html")).unwrap();
    assert!(
        html.contains("<h2>Training health</h2>") && html.contains("id=\"chart-training_health\""),
        "no training-health panel"
    );
    assert!(a.join("charts/training_health.svg").is_file());
    // A changed config refuses to mix with the old results.
    let exp2 = tiny(&d, "").to_path_buf();
    let t = std::fs::read_to_string(&exp2)
        .unwrap()
        .replace("bonus = 5.0", "bonus = 6.0");
    std::fs::write(&exp2, t).unwrap();
    let o = run(&exp2, &a, "1");
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("different configuration"));
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn replay_reproduces_recorded_evaluation() {
    let d = scratch("replay");
    let exp = tiny(&d, "");
    let out = d.join("r");
    assert!(bin()
        .args([
            "run",
            exp.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--cell",
            "0"
        ])
        .status()
        .unwrap()
        .success());
    let ck = out.join("with-path/seed-0/policy.safetensors");
    let csv = d.join("eps.csv");
    let o = bin()
        .args([
            "replay",
            ck.to_str().unwrap(),
            "--experiment",
            exp.to_str().unwrap(),
            "--variant",
            "with-path",
            "--episodes",
            "4",
            "--metrics-out",
            csv.to_str().unwrap(),
        ])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    // The last evaluation, read through the results format (typed rows, columns by name).
    let progress =
        termwise::results::read_evaluations(&out.join("with-path/seed-0/evaluations.csv")).unwrap();
    let last = progress.last().unwrap();
    let text = std::fs::read_to_string(&csv).unwrap();
    let header: Vec<&str> = text.lines().next().unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let rows: Vec<Vec<f64>> = text
        .lines()
        .skip(1)
        .map(|l| l.split(',').map(|c| c.parse().unwrap()).collect())
        .collect();
    let mean = |k: usize| rows.iter().map(|r| r[k]).sum::<f64>() / rows.len() as f64;
    let (success, ret) = (mean(col("clean_success")), mean(col("return")));
    assert_eq!(success, last.success_rate);
    assert!(
        (ret - last.mean_return).abs() < 1e-9 * last.mean_return.abs().max(1.0),
        "{ret} vs {}",
        last.mean_return
    );
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn bad_experiments_exit_2_and_write_nothing() {
    let d = scratch("bad");
    let cases = [
        (
            "[[variant]]\nname = \"with-path\"\n",
            "duplicate variant name",
        ),
        ("[[variant]]\nname = \"a b\"\n", "not safe as a folder name"),
        (
            "[[variant]]\nname = \"x\"\n[variant.reward.time]\nwieght = 1.0\n",
            "wieght",
        ),
        (
            "[[variant]]\nname = \"y\"\n[variant.reward.tyme]\nweight = 1.0\n",
            "tyme",
        ),
    ];
    for (extra, needle) in cases {
        let exp = tiny(&d, extra);
        let out = d.join("never");
        let o = run(&exp, &out, "1");
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{err}");
        assert!(err.contains(needle), "{needle}: {err}");
        assert_eq!(err.trim().lines().count(), 1, "{err}");
        assert!(!out.exists());
    }
    let exp = tiny(&d, "");
    let t = std::fs::read_to_string(&exp).unwrap();
    for (from, to, needle) in [
        ("seeds = 2", "seeds = 0", "study.seeds"),
        (
            "budget = 1024\neval_every = 512",
            "budget = 100\neval_every = 50",
            "smaller than one rollout",
        ),
    ] {
        std::fs::write(&exp, t.replace(from, to)).unwrap();
        let o = run(&exp, &d.join("never"), "1");
        assert_eq!(o.status.code(), Some(2));
        assert!(String::from_utf8_lossy(&o.stderr).contains(needle));
    }
    let _ = std::fs::remove_dir_all(&d);
}
