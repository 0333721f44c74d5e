//! Integration tests of the analysis → chart → report path on the fixture results folder
//! (tests/fixtures/study-small, synthetic test data from tests/all/support/fixture.rs), and of the
//! `termwise report` command's exit codes.

use crate::support;

use std::path::{Path, PathBuf};
use termwise::analysis::metric::{CurveChart, METRICS};
use termwise::analysis::{load_study, summarize, AnalysisOptions, RunStatus};
use termwise::chart::{write_report, ReportOptions};

fn fixture_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/study-small")
}

fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("termwise-test-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn files_under(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.push(p.strip_prefix(dir).unwrap().to_path_buf());
            }
        }
    }
    out.sort();
    out
}

fn copy_tree(from: &Path, to: &Path) {
    for rel in files_under(from) {
        let dst = to.join(&rel);
        std::fs::create_dir_all(dst.parent().unwrap()).unwrap();
        std::fs::copy(from.join(&rel), dst).unwrap();
    }
}

/// The committed fixture is exactly what the seeded generator writes. Regenerate with
/// `TERMWISE_WRITE_FIXTURE=1 cargo test --release --test all report::fixture`.
#[test]
fn fixture_matches_its_seeded_generator() {
    if std::env::var_os("TERMWISE_WRITE_FIXTURE").is_some() {
        // The README is written by hand: keep it across the regeneration.
        let readme = std::fs::read(fixture_dir().join("README.md")).unwrap();
        let _ = std::fs::remove_dir_all(fixture_dir());
        support::fixture::write_fixture(&fixture_dir());
        std::fs::write(fixture_dir().join("README.md"), readme).unwrap();
    }
    let tmp = scratch("fixture");
    support::fixture::write_fixture(&tmp);
    let committed: Vec<PathBuf> = files_under(&fixture_dir())
        .into_iter()
        .filter(|p| p.file_name().unwrap() != "README.md")
        .collect();
    assert_eq!(committed, files_under(&tmp));
    for rel in committed {
        assert_eq!(
            std::fs::read(fixture_dir().join(&rel)).unwrap(),
            std::fs::read(tmp.join(&rel)).unwrap(),
            "{}",
            rel.display()
        );
    }
    std::fs::remove_dir_all(tmp).unwrap();
}

#[test]
fn loading_counts_every_run_status_and_keeps_missing_runs() {
    let results = load_study(&fixture_dir()).unwrap();
    assert_eq!(results.variants.len(), 9);
    let status = |v: &str, seed: u64| {
        results
            .variants
            .iter()
            .find(|x| x.info.name == v)
            .unwrap()
            .runs
            .iter()
            .find(|r| r.seed == seed)
            .unwrap()
            .status
    };
    // The odd runs declared in tests/all/support/fixture.rs.
    assert_eq!(status("no-progress-term", 3), RunStatus::Diverged);
    assert_eq!(status("reverse-curriculum", 2), RunStatus::Missing);
    assert_eq!(status("reverse-curriculum", 4), RunStatus::Interrupted);
    assert_eq!(status("grid-t0.1-a0.01", 4), RunStatus::Running);
    let s = summarize(
        &results,
        &AnalysisOptions {
            resamples: 200,
            ..Default::default()
        },
    );
    assert_eq!(s.status.total(), 45);
    assert_eq!(
        (
            s.status.diverged,
            s.status.interrupted,
            s.status.running,
            s.status.missing
        ),
        (1, 1, 1, 1)
    );
    assert_eq!(s.status.done, 41);
    // The reward-gaming check flags the variant built to game its reward, and only it.
    let flagged: Vec<&str> = s
        .variants
        .iter()
        .filter(|v| v.gaming.is_some())
        .map(|v| v.info.name.as_str())
        .collect();
    assert_eq!(flagged, ["heavy-shaping"]);
    // Every interval contains its point estimate.
    for v in &s.variants {
        let finals = termwise::analysis::metric::with_final().map(|(id, _, _)| v.figure(id));
        for a in std::iter::once(v.auc).chain(finals) {
            if a.iqm.lo.is_finite() {
                assert!(
                    a.iqm.lo <= a.iqm.point && a.iqm.point <= a.iqm.hi,
                    "{}",
                    v.info.name
                );
            }
        }
    }
}

#[derive(Debug, serde::Deserialize)]
struct SummaryRow {
    variant: String,
    kind: String,
    runs_planned: usize,
    done: usize,
    diverged: usize,
    interrupted: usize,
    running: usize,
    missing: usize,
    steps_to_threshold_censored: usize,
    final_success_iqm: Option<f64>,
    final_success_iqm_lo: Option<f64>,
    final_success_iqm_hi: Option<f64>,
    time_to_goal_s_iqm: Option<f64>,
    rms_joint_acc_rad_s2_iqm_lo: Option<f64>,
    path_length_m_iqm: Option<f64>,
    peak_joint_acc_rad_s2_iqm: Option<f64>,
    rms_jerk_rad_s3_iqm: Option<f64>,
    min_clearance_m_iqm: Option<f64>,
    replans_iqm: Option<f64>,
    final_reached_iqm: Option<f64>,
    final_collision_rate_iqm: Option<f64>,
    rank_group: Option<usize>,
    interval_basis: String,
    steps_ratio_vs_reference: Option<f64>,
    poi_final_success: Option<f64>,
    mw_p_steps_to_threshold: Option<f64>,
    reward_gaming_flag: bool,
}

#[test]
fn report_writes_every_chart_and_each_names_every_variant() {
    let dir = scratch("report");
    copy_tree(&fixture_dir(), &dir);
    let opts = ReportOptions {
        analysis: AnalysisOptions {
            resamples: 300,
            seed: 5,
            ..Default::default()
        },
        ..Default::default()
    };
    let files = write_report(&dir, &opts).unwrap();
    let stems: Vec<&str> = files.charts.iter().map(|c| c.stem.as_str()).collect();
    // Between the fixed charts and the grid: the metrics drawn in charts of their own, in list order
    // (the fixture has curriculum variants, so the curriculum chart is among them).
    let own = METRICS
        .iter()
        .filter_map(|m| match m.curve.map(|c| c.chart) {
            Some(CurveChart::Own(o)) => Some(o.stem),
            _ => None,
        });
    let expected: Vec<&str> = [
        "learning_curves",
        "steps_to_threshold",
        "reward_terms",
        "shaping_check",
    ]
    .into_iter()
    .chain(own)
    .chain(["grid_sensitivity"])
    .collect();
    assert_eq!(stems, expected);
    assert!(stems.contains(&"curriculum"));
    let all: Vec<&str> = files
        .summary
        .variants
        .iter()
        .map(|v| v.info.name.as_str())
        .collect();
    let learned: Vec<&str> = all
        .iter()
        .copied()
        .filter(|n| *n != "pd-tracking")
        .collect();
    let grid: Vec<&str> = all
        .iter()
        .copied()
        .filter(|n| n.starts_with("grid-"))
        .collect();
    for c in &files.charts {
        for p in [&c.svg, &c.png] {
            let len = std::fs::metadata(p).unwrap().len();
            assert!(len > 1000, "{} is {len} bytes", p.display());
        }
        let png = std::fs::read(&c.png).unwrap();
        assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n", "{}", c.png.display());
        let svg = std::fs::read_to_string(&c.svg).unwrap();
        assert_eq!(svg, c.svg_text);
        let expected: &[&str] = match c.stem.as_str() {
            "learning_curves" => &all,
            "grid_sensitivity" => &grid,
            "curriculum" => &["reverse-curriculum"],
            _ => &learned,
        };
        for name in expected {
            assert!(svg.contains(name), "{} lacks {name}", c.stem);
        }
    }
    let html = std::fs::read_to_string(&files.report_html).unwrap();
    assert!(!html.contains("src=\"http") && !html.contains("href=\"http"));
    assert_eq!(html.matches("<svg").count(), files.charts.len());
    for name in &all {
        assert!(html.contains(name));
    }
    // The answer comes before the charts.
    assert!(html.find("The answer").unwrap() < html.find("<svg").unwrap());

    let mut reader = csv::Reader::from_path(&files.summary_csv).unwrap();
    let rows: Vec<SummaryRow> = reader.deserialize().collect::<Result<_, _>>().unwrap();
    assert_eq!(rows.len(), 9);
    let row = |n: &str| rows.iter().find(|r| r.variant == n).unwrap();
    assert_eq!(row("no-progress-term").diverged, 1);
    assert_eq!(row("reverse-curriculum").missing, 1);
    assert_eq!(row("reverse-curriculum").interrupted, 1);
    assert_eq!(row("grid-t0.1-a0.01").running, 1);
    assert!(row("heavy-shaping").reward_gaming_flag);
    assert_eq!(row("pd-tracking").kind, "baseline");
    for r in &rows {
        assert_eq!(r.runs_planned, 5);
        assert_eq!(
            r.done + r.diverged + r.interrupted + r.running + r.missing,
            5
        );
        let (p, lo, hi) = (
            r.final_success_iqm.unwrap(),
            r.final_success_iqm_lo.unwrap(),
            r.final_success_iqm_hi.unwrap(),
        );
        assert!(
            lo <= p && p <= hi && (0.0..=1.0).contains(&p),
            "{}",
            r.variant
        );
        assert!(r.time_to_goal_s_iqm.is_some() && r.rms_joint_acc_rad_s2_iqm_lo.is_some());
        assert!(r.path_length_m_iqm.is_some() && r.peak_joint_acc_rad_s2_iqm.is_some());
        assert!(r.rms_jerk_rad_s3_iqm.is_some() && r.min_clearance_m_iqm.is_some());
        assert!(r.replans_iqm.is_some());
        // No probability of improvement or p-value for the reference itself, nor for the
        // deterministic controller (one run is not a sample of seeds).
        if r.variant == "all-terms" || r.kind == "baseline" {
            assert!(r.poi_final_success.is_none(), "{}", r.variant);
            assert!(r.steps_ratio_vs_reference.is_none(), "{}", r.variant);
        } else {
            assert!(r.poi_final_success.is_some(), "{}", r.variant);
        }
        // Clean success never exceeds the reached rate; every rate is a fraction.
        let (clean, reached, coll) = (
            r.final_success_iqm.unwrap(),
            r.final_reached_iqm.unwrap(),
            r.final_collision_rate_iqm.unwrap(),
        );
        assert!(
            clean <= reached + 1e-12 && (0.0..=1.0).contains(&coll),
            "{}",
            r.variant
        );
        if r.kind == "baseline" {
            assert_eq!(r.interval_basis, "evaluation episodes (Wilson)");
            assert!(r.rank_group.is_none());
            // A Wilson interval over 20 episodes is wide, never a point.
            assert!(r.final_success_iqm_hi.unwrap() > r.final_success_iqm_lo.unwrap());
        } else {
            assert_eq!(r.interval_basis, "seeds (stratified bootstrap)");
        }
        if r.kind == "learned" && r.variant != "all-terms" {
            assert!(r.mw_p_steps_to_threshold.is_some());
        }
    }
    // The slowest grid cell never reaches 80% within the budget in most seeds: censored, not dropped.
    assert!(row("grid-t0.1-a0.01").steps_to_threshold_censored >= 1);
    std::fs::remove_dir_all(dir).unwrap();
}

#[test]
fn a_one_key_grid_draws_its_curve_naming_each_level() {
    // The fixture's 2 x 2 grid cut to one key: the two variants with acceleration weight 0.001 keep only their
    // time weight, the other two are no longer on a grid. Then the one-key curve replaces the heat map.
    let dir = scratch("report-grid-curve");
    copy_tree(&fixture_dir(), &dir);
    let p = dir.join("study.json");
    let mut study: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&p).unwrap()).unwrap();
    for v in study["variants"].as_array_mut().unwrap() {
        let name = v["name"].as_str().unwrap().to_string();
        if name.ends_with("-a0.001") {
            let t = v["grid"]["reward.time.weight"].clone();
            v["grid"] = serde_json::json!({ "reward.time.weight": t });
        } else if name.starts_with("grid-") {
            v["grid"] = serde_json::Value::Null;
        }
    }
    std::fs::write(&p, serde_json::to_string_pretty(&study).unwrap()).unwrap();
    let opts = ReportOptions {
        analysis: AnalysisOptions {
            resamples: 200,
            seed: 5,
            ..Default::default()
        },
        ..Default::default()
    };
    let files = write_report(&dir, &opts).unwrap();
    let stems: Vec<&str> = files.charts.iter().map(|c| c.stem.as_str()).collect();
    assert!(
        stems.contains(&"grid_curve") && !stems.contains(&"grid_sensitivity"),
        "{stems:?}"
    );
    let curve = files
        .charts
        .iter()
        .find(|c| c.stem == "grid_curve")
        .unwrap();
    for name in ["grid-t0.01-a0.001", "grid-t0.1-a0.001"] {
        assert!(curve.svg_text.contains(name), "the curve lacks {name}");
    }
    assert!(!curve.svg_text.contains("grid-t0.1-a0.01<"));
    assert!(curve.svg_text.contains("reward.time.weight"));
}

#[test]
fn report_command_redraws_from_files_and_maps_errors_to_exit_codes() {
    let bin = env!("CARGO_BIN_EXE_termwise");
    let dir = scratch("cli");
    copy_tree(&fixture_dir(), &dir);
    // A partially finished study: drop two more run folders.
    std::fs::remove_dir_all(dir.join("all-terms/seed-4")).unwrap();
    std::fs::remove_dir_all(dir.join("heavy-shaping/seed-0")).unwrap();
    let out = std::process::Command::new(bin)
        .args([
            "report",
            dir.to_str().unwrap(),
            "--resamples",
            "200",
            "--seed",
            "3",
        ])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let stdout = String::from_utf8(out.stdout).unwrap();
    assert!(stdout.contains("3 missing"), "{stdout}");
    assert!(stdout.contains("reverse-curriculum"));
    assert!(dir.join("report.html").is_file());
    assert!(dir.join("charts/learning_curves.png").is_file());

    let empty = scratch("cli-empty");
    let out = std::process::Command::new(bin)
        .args(["report", empty.to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("study.json"));

    let out = std::process::Command::new(bin)
        .args(["report", dir.to_str().unwrap(), "--resamples", "0"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    std::fs::remove_dir_all(dir).unwrap();
    std::fs::remove_dir_all(empty).unwrap();
}
