//! Racing through the binary: the same runs and decisions with one or two workers and cell by cell, each
//! raced run identical to the same seed of the un-raced study; a rung decided on finished runs stops the
//! variant that is clearly behind and gives its seeds to the rest (`run --decide`, status, cells, report);
//! bad racing settings are exit 2; the Slurm scripts chain stage arrays and decision jobs.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use termwise::results::{self, EvalRow, RunRecord, RunStatus};

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_termwise"))
}

fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("termwise-racing-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn ok(o: Output) -> String {
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn run(exp: &Path, out: &Path, more: &[&str]) -> Output {
    bin()
        .args([
            "run",
            exp.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--no-report",
        ])
        .args(more)
        .output()
        .unwrap()
}

/// Every file of a results folder that must be byte-identical between repeats (all but the wall-clock ones).
fn reproducible_files(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else if let Some(n) = p.file_name().and_then(|n| n.to_str()) {
                if n.ends_with(".csv") && n != "training-speed.csv" || n == "racing.json" {
                    out.push(p.strip_prefix(dir).unwrap().to_path_buf());
                }
            }
        }
    }
    out.sort();
    out
}

const RACED: &str = "[[variant]]\nname = \"controller\"\nkind = \"baseline\"\n[study.racing]\nrungs = [0.8]\nmax_seeds = 6\n";

#[test]
fn raced_runs_and_decisions_are_the_same_for_any_jobs_and_cell_by_cell() {
    let d = scratch("same");
    let text = crate::common::tiny_study(&d, "t.toml", RACED);
    let exp = d.join("raced.toml");
    std::fs::write(
        &exp,
        std::fs::read_to_string(&text)
            .unwrap()
            .replace("seeds = 2", "seeds = 5"),
    )
    .unwrap();
    let (one, two, cells) = (d.join("one"), d.join("two"), d.join("cells"));
    ok(run(&exp, &one, &["--jobs", "1"]));
    ok(run(&exp, &two, &["--jobs", "2"]));
    // The plan: stage 0 is 4 seeds of each learned variant and the controller (9 cells), stage 1 the seeds
    // 4 and 5 of each (4 cells). A stage-1 cell before rung 1 is decided is refused (exit 1), saying why.
    let o = run(&exp, &cells, &["--cell", "9"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stderr).contains("racing rung 1 cannot be decided yet"));
    for k in 0..13 {
        ok(run(&exp, &cells, &["--cell", &k.to_string()]));
    }
    let files = reproducible_files(&one);
    assert!(
        files.len() > 30 && files.iter().any(|f| f.ends_with("racing.json")),
        "{files:?}"
    );
    for f in &files {
        let a = std::fs::read(one.join(f)).unwrap();
        assert_eq!(
            a,
            std::fs::read(two.join(f)).unwrap(),
            "--jobs 2: {}",
            f.display()
        );
        assert_eq!(
            a,
            std::fs::read(cells.join(f)).unwrap(),
            "cells: {}",
            f.display()
        );
    }
    let rec = results::read_racing(&one).unwrap().unwrap();
    assert_eq!(rec.rungs.len(), 1);
    assert_eq!(rec.rungs[0].seeds, 4);
    // Each raced run is the same seed of the un-raced study (the same config hash, the same files): cell 6 of
    // the un-raced plan (variant-major: with-path 0-4, without-path 5-9) is without-path seed 1.
    let plain = d.join("plain.toml");
    let t = std::fs::read_to_string(&exp).unwrap();
    std::fs::write(
        &plain,
        t.replace("[study.racing]\nrungs = [0.8]\nmax_seeds = 6\n", ""),
    )
    .unwrap();
    let unraced = d.join("unraced");
    ok(run(&plain, &unraced, &["--cell", "6"]));
    for f in [
        "run.json",
        "evaluations.csv",
        "term_contributions.csv",
        "training.csv",
    ] {
        let p = Path::new("without-path/seed-1").join(f);
        let (a, b) = (
            std::fs::read(one.join(&p)).unwrap(),
            std::fs::read(unraced.join(&p)).unwrap(),
        );
        if f == "run.json" {
            let hash = |x: &[u8]| {
                serde_json::from_slice::<serde_json::Value>(x).unwrap()["config_hash"].clone()
            };
            assert_eq!(hash(&a), hash(&b));
        } else {
            assert_eq!(a, b, "{f}");
        }
    }
    let _ = std::fs::remove_dir_all(&d);
}

/// A finished run written by hand: run.json with the experiment's config hash and a learning curve.
fn fake_run(
    out: &Path,
    exp: &termwise::study::Experiment,
    variant: usize,
    seed: u64,
    curve: &[f64],
) {
    let v = &exp.variants[variant];
    let dir = results::run_dir(out, &v.name, seed);
    std::fs::create_dir_all(&dir).unwrap();
    let mut rec = RunRecord::new(&exp.study.name, &v.name, seed, &exp.config_hash(v, seed));
    rec.finish(RunStatus::Done, exp.study.budget as u64, 1.0, None);
    results::write_run(&dir, &rec).unwrap();
    let rows: Vec<EvalRow> = curve
        .iter()
        .enumerate()
        .map(|(k, &s)| EvalRow {
            env_steps: k as u64 * 512,
            success_rate: s,
            reached_rate: s,
            ..EvalRow::default()
        })
        .collect();
    results::write_evaluations(&dir, &rows).unwrap();
}

#[test]
fn a_rung_stops_the_variant_that_is_clearly_behind_and_gives_its_seeds_to_the_rest() {
    let d = scratch("rung");
    let extra = "[[variant]]\nname = \"broken\"\n[variant.reward.goal]\nweight = 0.0\n[study.racing]\nrungs = [0.5]\nmax_seeds = 9\n";
    let text = crate::common::tiny_study(&d, "t.toml", extra);
    let path = d.join("rung.toml");
    std::fs::write(
        &path,
        std::fs::read_to_string(&text)
            .unwrap()
            .replace("seeds = 2", "seeds = 8"),
    )
    .unwrap();
    let exp = termwise::study::experiment::load(&path).unwrap();
    let out = d.join("out");
    let (p, o) = (path.to_str().unwrap(), out.to_str().unwrap());
    // Three seeds of each: the rung (4 seeds) cannot be decided, and says which runs it waits for.
    for v in 0..3 {
        for s in 0..3 {
            let c = if v == 2 {
                [0.0, 0.02, 0.05]
            } else {
                [0.1, 0.7, 0.85 + 0.02 * s as f64]
            };
            fake_run(&out, &exp, v, s, &c);
        }
    }
    let w = bin()
        .args(["run", p, "--out", o, "--decide", "1"])
        .output()
        .unwrap();
    assert_eq!(w.status.code(), Some(1));
    let err = String::from_utf8_lossy(&w.stderr);
    assert!(
        err.contains("with-path seed 3, without-path seed 3, broken seed 3"),
        "{err}"
    );
    for v in 0..3 {
        let c = if v == 2 {
            [0.0, 0.03, 0.04]
        } else {
            [0.2, 0.75, 0.9 - 0.01 * v as f64]
        };
        fake_run(&out, &exp, v, 3, &c);
    }
    let said = ok(bin()
        .args(["run", p, "--out", o, "--decide", "1"])
        .output()
        .unwrap());
    assert!(
        said.contains("rung 1 (4 seeds per variant): stopped broken"),
        "{said}"
    );
    let rec = results::read_racing(&out).unwrap().unwrap();
    let seeds: Vec<(String, u64, Option<u64>)> = rec
        .variants
        .iter()
        .map(|v| (v.name.clone(), v.seeds, v.stopped_at))
        .collect();
    // broken stops after 4 of its 8 seeds; its 4 freed seeds go 2 and 2 to the others (8 + 2 = 10, capped at
    // max_seeds = 9, so one seed of the freed budget each is saved).
    assert_eq!(
        seeds,
        vec![
            ("with-path".into(), 9, None),
            ("without-path".into(), 9, None),
            ("broken".into(), 4, Some(1))
        ]
    );
    assert_eq!(rec.unraced_steps, 3 * 8 * 1024);
    assert_eq!(rec.planned_steps, (9 + 9 + 4) * 1024);
    assert_eq!(
        (rec.freed_steps, rec.reinvested_steps),
        (4 * 1024, 2 * 1024)
    );
    let e = rec.rungs[0]
        .entries
        .iter()
        .find(|e| e.variant == "broken")
        .unwrap();
    assert!(!e.kept && e.success_diff.unwrap().hi < 0.0, "{e:?}");
    // Its stage-1 cells do nothing; status counts them as not needed.
    let st = ok(bin().args(["status", o]).output().unwrap());
    assert!(st.contains("5 not needed (racing)"), "{st}");
    let cell = 12 + 10; // stage 1: with-path seeds 4..9 (12..17), without-path (17..22), broken from 22
    let said = ok(run(&path, &out, &["--cell", &cell.to_string()]));
    assert!(said.contains("racing stopped `broken` at rung 1"), "{said}");
    // The report says where it stopped and why.
    ok(bin()
        .args(["report", o, "--resamples", "50"])
        .output()
        .unwrap());
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(
        html.contains("id=racing-table")
            && html.contains("rung 1 <span class=ci>50% of its budget</span>")
    );
    assert!(
        html.contains("its final clean success is lower than"),
        "no reason given"
    );
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn bad_racing_settings_are_exit_2_with_the_key() {
    let d = scratch("bad");
    for (extra, needle) in [
        ("[study.racing]\nrungs = [0.5]\n", "study.racing.rungs[0]: 0.5 of 2 seeds is 1 seed(s) per variant; a rung decides on at least 4"),
        ("[study.racing]\nrungs = [1.5]\n", "study.racing.rungs[0]: must be a fraction of the budget strictly between 0 and 1"),
        ("[study.racing]\nrungs = []\n", "study.racing.rungs: give 1 to 10 fractions"),
        ("[study.racing]\nrung = [0.5]\n", "unknown field `rung`"),
    ] {
        let exp = crate::common::tiny_study(&d, "bad.toml", extra);
        let o = run(&exp, &d.join("never"), &[]);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{err}");
        assert!(err.contains(needle), "{needle}: {err}");
        assert!(err.contains("bad.toml:"), "{err}");
        assert!(!d.join("never").exists());
    }
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn slurm_scripts_chain_stage_arrays_and_decisions() {
    let d = scratch("slurm");
    let text = crate::common::tiny_study(&d, "t.toml", RACED);
    let exp = d.join("raced.toml");
    std::fs::write(
        &exp,
        std::fs::read_to_string(&text)
            .unwrap()
            .replace("seeds = 2", "seeds = 5"),
    )
    .unwrap();
    let out = d.join("out");
    let said = ok(bin()
        .args([
            "slurm",
            exp.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--max-parallel",
            "2",
        ])
        .output()
        .unwrap());
    assert!(said.contains("13 runs"), "{said}");
    let read = |f: &str| std::fs::read_to_string(out.join("slurm").join(f)).unwrap();
    assert!(read("cells-stage-0.sbatch")
        .lines()
        .any(|l| l == "#SBATCH --array=0-8%2"));
    assert!(read("cells-stage-1.sbatch")
        .lines()
        .any(|l| l == "#SBATCH --array=9-12%2"));
    assert!(read("decide-1.sbatch").contains("--decide 1"));
    assert!(read("report.sbatch").contains("--decide 1 || true"));
    // submit.sh against a stand-in sbatch that logs its arguments and answers like `--parsable`.
    let bin_dir = d.join("bin");
    std::fs::create_dir_all(&bin_dir).unwrap();
    let log = d.join("sbatch.log");
    let fake = format!(
        "#!/bin/bash\necho \"$*\" >> '{0}'\nn=$(wc -l < '{0}')\necho \"$((70 + n));c\"\n",
        log.display()
    );
    std::fs::write(bin_dir.join("sbatch"), fake).unwrap();
    std::fs::set_permissions(
        bin_dir.join("sbatch"),
        std::os::unix::fs::PermissionsExt::from_mode(0o755),
    )
    .unwrap();
    let sub = Command::new("bash")
        .arg(out.join("slurm/submit.sh"))
        .env(
            "PATH",
            format!(
                "{}:{}",
                bin_dir.display(),
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
    assert_eq!(calls.len(), 4, "{calls:?}");
    assert!(calls[0].starts_with("--parsable ") && calls[0].ends_with("cells-stage-0.sbatch"));
    assert!(
        calls[1].starts_with("--parsable --dependency=afterany:71 ")
            && calls[1].ends_with("decide-1.sbatch")
    );
    assert!(
        calls[2].starts_with("--parsable --dependency=afterok:72 ")
            && calls[2].ends_with("cells-stage-1.sbatch")
    );
    assert!(
        calls[3].starts_with("--parsable --dependency=afterany:73 ")
            && calls[3].ends_with("report.sbatch")
    );
    assert_eq!(
        std::fs::read_to_string(out.join("slurm/job-ids")).unwrap(),
        "stage-0 71\ndecide-1 72\nstage-1 73\nreport 74\n"
    );
    let _ = std::fs::remove_dir_all(&d);
}
