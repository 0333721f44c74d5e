//! Hostile use of the binary: two `run` processes on one results folder, kill -9 and Ctrl-C in the middle of
//! a study, checkpoints replayed against the wrong task, garbage files, absurd numbers. Nothing may panic,
//! hang or be lost: each case ends with a one-line error and exit code 2 (bad input), 1 (failure) or 130
//! (interrupted), and results equal those of an undisturbed run byte for byte.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::time::Duration;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_termwise"))
}

fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("termwise-robust-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn scenario_file(name: &str) -> String {
    format!(
        "{}/experiments/scenarios/{name}",
        env!("CARGO_MANIFEST_DIR")
    )
}

/// A tiny study: 2 variants x 2 seeds of 1024 steps (two rollouts of 8 x 64), plus `extra` at the end.
fn tiny(dir: &Path, file: &str, extra: &str) -> PathBuf {
    crate::common::tiny_study(dir, file, extra)
}

fn run_args(exp: &Path, out: &Path) -> Vec<String> {
    [
        "run",
        exp.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--jobs",
        "1",
        "--no-report",
    ]
    .map(String::from)
    .to_vec()
}

fn text(o: &Output) -> (String, String) {
    (
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

/// "N runs ran" from a `run` summary.
fn runs_ran(stdout: &str) -> usize {
    let at = stdout.find(" runs ran").expect("run summary");
    stdout[..at]
        .rsplit(' ')
        .next()
        .unwrap()
        .parse()
        .expect("count")
}

const RUNS: [(&str, u64); 4] = [
    ("with-path", 0),
    ("with-path", 1),
    ("without-path", 0),
    ("without-path", 1),
];

/// Every result file of every run of `a` equals that of `b` byte for byte; run records agree on
/// everything but wall time and heartbeat; no lock or temporary file is left.
fn assert_same_results(a: &Path, b: &Path) {
    for (v, s) in RUNS {
        let (ra, rb) = (
            a.join(v).join(format!("seed-{s}")),
            b.join(v).join(format!("seed-{s}")),
        );
        for f in [
            "evaluations.csv",
            "term_contributions.csv",
            "policy.safetensors",
            "policy.json",
            "policy-best.safetensors",
            "policy-best.json",
        ] {
            let x = std::fs::read(ra.join(f)).unwrap_or_else(|e| panic!("{v}/{s}/{f}: {e}"));
            let y = std::fs::read(rb.join(f)).unwrap();
            assert!(x == y, "{v} seed {s}: {f} differs");
        }
        let rec = |d: &Path| -> serde_json::Value {
            let mut j: serde_json::Value =
                serde_json::from_str(&std::fs::read_to_string(d.join("run.json")).unwrap())
                    .unwrap();
            let m = j.as_object_mut().unwrap();
            m.remove("wall_seconds");
            m.remove("heartbeat_unix");
            m.remove("steps_per_second");
            j
        };
        assert_eq!(rec(&ra), rec(&rb), "{v} seed {s}: run.json differs");
        assert_eq!(rec(&ra)["status"], "done");
        for d in [&ra, &rb] {
            for e in std::fs::read_dir(d).unwrap() {
                let name = e.unwrap().file_name().to_string_lossy().into_owned();
                assert!(
                    !name.contains(".tmp-") && !name.starts_with("run.lock"),
                    "{} left in {}",
                    name,
                    d.display()
                );
            }
        }
    }
}

/// Wait (up to 120 s) until some run.json under `out` says `running`.
fn wait_running(out: &Path) -> bool {
    for _ in 0..12_000 {
        for (v, s) in RUNS {
            let p = out.join(v).join(format!("seed-{s}")).join("run.json");
            if std::fs::read_to_string(&p).is_ok_and(|t| t.contains("\"running\"")) {
                return true;
            }
        }
        std::thread::sleep(Duration::from_millis(10));
    }
    false
}

#[test]
fn two_run_processes_on_one_folder_equal_a_single_run() {
    let d = scratch("two");
    let exp = tiny(&d, "tiny.toml", "");
    let single = d.join("single");
    let o = bin().args(run_args(&exp, &single)).output().unwrap();
    assert!(o.status.success(), "{}", text(&o).1);

    // Two processes started together on one folder: each run is taken by exactly one of them, none twice.
    let shared = d.join("shared");
    let start = || {
        bin()
            .args(run_args(&exp, &shared))
            .stdout(std::process::Stdio::piped())
            .stderr(std::process::Stdio::piped())
            .spawn()
            .unwrap()
    };
    let (p1, p2) = (start(), start());
    let (p1, p2) = (
        p1.wait_with_output().unwrap(),
        p2.wait_with_output().unwrap(),
    );
    let ((o1, e1), (o2, e2)) = (text(&p1), text(&p2));
    assert!(p1.status.success() && p2.status.success(), "{e1}\n{e2}");
    assert_eq!(runs_ran(&o1) + runs_ran(&o2), 4, "{o1}\n{o2}");
    assert_same_results(&single, &shared);

    // Both again: everything is finished, nobody runs or rewrites anything.
    let (p1, p2) = (start(), start());
    let (p1, p2) = (
        p1.wait_with_output().unwrap(),
        p2.wait_with_output().unwrap(),
    );
    assert!(p1.status.success() && p2.status.success());
    assert_eq!(runs_ran(&text(&p1).0) + runs_ran(&text(&p2).0), 0);
    assert_same_results(&single, &shared);
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn kill_9_then_status_says_stale_at_once_and_a_rerun_cleans_up_and_matches() {
    let d = scratch("kill");
    let exp = tiny(&d, "tiny.toml", "");
    let single = d.join("single");
    assert!(bin()
        .args(run_args(&exp, &single))
        .output()
        .unwrap()
        .status
        .success());
    let out = d.join("killed");
    let mut child = bin()
        .args(run_args(&exp, &out))
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    assert!(wait_running(&out), "no run started");
    child.kill().unwrap(); // SIGKILL
    child.wait().unwrap();
    let pid = child.id();
    // A temporary file the killed writer might have left mid-write.
    let host = std::fs::read_to_string("/proc/sys/kernel/hostname")
        .unwrap_or_default()
        .trim()
        .chars()
        .filter(|c| c.is_ascii_alphanumeric() || *c == '-')
        .take(32)
        .collect::<String>();
    let seed0 = out.join("with-path/seed-0");
    let leftover = seed0.join(format!(".run.json.tmp-{host}-{pid}-99"));
    std::fs::write(&leftover, b"{\"half\": ").unwrap();
    let st = bin()
        .args(["status", out.to_str().unwrap()])
        .output()
        .unwrap();
    let (so, se) = text(&st);
    assert!(st.status.success(), "{se}");
    assert!(
        !so.contains(" running ("),
        "a dead run shown as running:\n{so}"
    );
    assert!(so.contains("stale"), "{so}");
    // Rerun: the stale lock is reclaimed, leftovers go, the results equal an undisturbed run.
    let o = bin().args(run_args(&exp, &out)).output().unwrap();
    assert!(o.status.success(), "{}", text(&o).1);
    assert!(!leftover.exists());
    assert_same_results(&single, &out);
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn ctrl_c_exits_130_and_marks_the_run_interrupted() {
    let d = scratch("int");
    // A longer budget so the interrupt lands mid-run.
    let exp = tiny(&d, "tiny.toml", "");
    let t = std::fs::read_to_string(&exp).unwrap().replace(
        "budget = 1024\neval_every = 512",
        "budget = 2000000\neval_every = 200000",
    );
    std::fs::write(&exp, t).unwrap();
    let out = d.join("r");
    let child = bin()
        .args(run_args(&exp, &out))
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    assert!(wait_running(&out), "no run started");
    let k = Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(k.success());
    let o = child.wait_with_output().unwrap();
    let (so, se) = text(&o);
    assert_eq!(o.status.code(), Some(130), "{so}{se}");
    assert!(so.contains("interrupted"), "{so}");
    let rec = std::fs::read_to_string(out.join("with-path/seed-0/run.json")).unwrap();
    assert!(rec.contains("\"interrupted\""), "{rec}");
    assert!(!out.join("with-path/seed-0/run.lock").exists());
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn replay_refuses_a_checkpoint_of_another_task_and_names_a_garbage_file() {
    let d = scratch("replay");
    let exp = tiny(&d, "tiny.toml", "");
    let out = d.join("r");
    let o = bin()
        .args(["run", exp.to_str().unwrap(), "--out", out.to_str().unwrap()])
        .args(["--cell", "0", "--no-report"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", text(&o).1);
    let ck = out.join("with-path/seed-0/policy.safetensors");
    let replay = |exp: &Path, extra: &[&str]| {
        bin()
            .args(["replay", ck.to_str().unwrap(), "--experiment"])
            .arg(exp)
            .args(["--episodes", "1", "--metrics-out"])
            .arg(d.join("eps.csv"))
            .args(extra)
            .output()
            .unwrap()
    };
    // The sidecar records what the policy was trained for.
    let side = std::fs::read_to_string(out.join("with-path/seed-0/policy.json")).unwrap();
    assert!(side.contains("\"trained_for\"") && side.contains("\"variant\": \"with-path\""));
    // Observation without waypoints: refused, exit 2, one line naming the layouts.
    let no_wp = tiny(&d, "no-wp.toml", "[observation]\nwaypoints = false\n");
    let o = replay(&no_wp, &[]);
    let (_, e) = text(&o);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert_eq!(e.trim().lines().count(), 1, "{e}");
    assert!(
        e.contains("was trained for observations of") && e.contains("waypoints = false"),
        "{e}"
    );
    // A 3-link scenario: refused.
    let o = replay(&exp, &["--scenario", &scenario_file("table-3link.toml")]);
    let (_, e) = text(&o);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert!(e.contains("3-joint arm"), "{e}");
    // Another variant with the same layout: replayed, with a warning.
    let o = replay(&exp, &["--variant", "without-path"]);
    let (_, e) = text(&o);
    assert!(o.status.success(), "{e}");
    assert!(e.contains("was trained as variant `with-path`"), "{e}");
    // A garbage checkpoint beside a valid sidecar: the error names the file.
    let junk = d.join("junk.safetensors");
    std::fs::write(&junk, [0xffu8; 64]).unwrap();
    std::fs::copy(
        out.join("with-path/seed-0/policy.json"),
        d.join("junk.json"),
    )
    .unwrap();
    let o = bin()
        .args(["replay", junk.to_str().unwrap(), "--experiment"])
        .arg(&exp)
        .args(["--episodes", "1"])
        .output()
        .unwrap();
    let (_, e) = text(&o);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert!(
        e.contains("junk.safetensors") && e.contains("not a readable safetensors file"),
        "{e}"
    );
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn absurd_numbers_are_rejected_with_the_key_named() {
    let d = scratch("absurd");
    let cases: [(&str, &str, &str); 7] = [
        (
            "[scenario.physics]\nhorizon = 1000000000000\n",
            "",
            "scenario.physics.horizon",
        ),
        (
            "[scenario.events]\ngoal_jump_rate = 1e300\n",
            "",
            "scenario.events.goal_jump_rate",
        ),
        (
            "[scenario.goal]\nposition = [5.0, 5.0]\n",
            "",
            "scenario.goal.position",
        ),
        ("", "bonus = 5.0|bonus = 1e300", "reward.goal.bonus"),
        (
            "[variant.reward.time]\ncost = 1e300\n",
            "",
            "reward.time.cost",
        ),
        (
            "",
            "budget = 1024|budget = 9223372036854775000",
            "study.budget",
        ),
        ("", "seeds = 2|seeds = 100000", "study.seeds"),
    ];
    for (extra, replace, needle) in cases {
        let exp = tiny(&d, "absurd.toml", extra);
        if let Some((from, to)) = replace.split_once('|') {
            let t = std::fs::read_to_string(&exp).unwrap().replacen(from, to, 1);
            std::fs::write(&exp, t).unwrap();
        }
        let o = bin()
            .args(["check", exp.to_str().unwrap(), "--no-calibrate"])
            .output()
            .unwrap();
        let (_, e) = text(&o);
        assert_eq!(o.status.code(), Some(2), "{needle}: {e}");
        assert!(e.contains(needle), "{needle}: {e}");
        assert_eq!(e.trim().lines().count(), 1, "{e}");
    }
    // --jobs 0 is refused before anything runs.
    let exp = tiny(&d, "ok.toml", "");
    let o = bin()
        .args(["run", exp.to_str().unwrap(), "--jobs", "0", "--out"])
        .arg(d.join("never"))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    assert!(!d.join("never").exists());
    // Simulate with torques that blow the state up: an error naming the step, nothing written.
    let scen = d.join("torque.toml");
    std::fs::write(
        &scen,
        "[arm]\ncontrol = \"torque\"\n[[arm.link]]\nlength = 0.5\nmass = 1.0\n[[arm.link]]\nlength = 0.4\nmass = 0.8\n\
         [start]\nq = [0.0, 0.5]\n[goal]\nposition = [0.3, 0.3]\n",
    )
    .unwrap();
    let inputs = d.join("in.csv");
    std::fs::write(&inputs, "u1,u2\n0,0\n1e308,-1e308\n1e308,1e308\n").unwrap();
    let states = d.join("states.csv");
    let o = bin()
        .args(["simulate", scen.to_str().unwrap(), "--inputs"])
        .arg(&inputs)
        .arg("--out")
        .arg(&states)
        .output()
        .unwrap();
    let (_, e) = text(&o);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert!(e.contains("non-finite at control step"), "{e}");
    assert!(!states.exists());
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn status_tells_an_unreadable_run_record_from_a_missing_one() {
    let d = scratch("corrupt");
    let exp = tiny(&d, "tiny.toml", "");
    let out = d.join("r");
    let o = bin()
        .args(["run", exp.to_str().unwrap(), "--out", out.to_str().unwrap()])
        .args(["--cell", "0", "--no-report"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", text(&o).1);
    std::fs::write(out.join("with-path/seed-0/run.json"), b"{\"study\": \"ti").unwrap();
    let o = bin()
        .args(["status", out.to_str().unwrap()])
        .output()
        .unwrap();
    let (so, _) = text(&o);
    assert!(
        so.contains("cell   0: with-path seed 0: unreadable"),
        "{so}"
    );
    assert!(so.contains("3 missing"), "{so}");
    let _ = std::fs::remove_dir_all(&d);
}

/// `report` on a published folder (study.json, summary and report, no run folders: what a fresh clone holds)
/// refuses instead of replacing the published figures with an empty report, and leaves the files untouched.
#[test]
fn report_refuses_to_empty_a_published_folder() {
    let d = scratch("published");
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("results/moving-goal");
    for f in ["study.json", "summary.csv", "report.html"] {
        std::fs::copy(src.join(f), d.join(f)).unwrap();
    }
    let before = std::fs::read(d.join("summary.csv")).unwrap();
    let out = bin()
        .args(["report", d.to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2), "{out:?}");
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("no run folders"), "{err}");
    assert_eq!(std::fs::read(d.join("summary.csv")).unwrap(), before);
    let out = bin()
        .args(["report", d.to_str().unwrap(), "--overwrite-published"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0), "{out:?}");
    let _ = std::fs::remove_dir_all(&d);
}
