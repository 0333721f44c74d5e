//! `termwise plan` end to end: runs the binary on the demo scenario, parses the waypoint CSV into strict
//! types, checks it against forward kinematics, and checks the bad-input exit code.

use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_termwise"))
}

fn scratch(name: &str) -> std::path::PathBuf {
    let d = std::env::temp_dir().join(format!("termwise-plan-cli-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d
}

#[derive(Debug, serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct Row {
    k: usize,
    q1: f64,
    q2: f64,
    x: f64,
    y: f64,
}

#[test]
fn plan_writes_svg_and_waypoint_csv() {
    let d = scratch("ok");
    let out = d.join("demo.svg");
    let st = bin()
        .args([
            "plan",
            "experiments/scenarios/table-2link-4obs.toml",
            "--seed",
            "3",
            "--goal=-0.2,0.5",
            "--tree",
            "--out",
        ])
        .arg(&out)
        .status()
        .unwrap();
    assert!(st.success());
    let svg = std::fs::read_to_string(&out).unwrap();
    assert!(
        svg.starts_with("<svg") && svg.contains("waypoints") && svg.trim_end().ends_with("</svg>")
    );
    let mut rdr = csv::Reader::from_path(d.join("demo.csv")).unwrap();
    assert_eq!(rdr.headers().unwrap(), vec!["k", "q1", "q2", "x", "y"]);
    let rows: Vec<Row> = rdr.deserialize().collect::<Result<_, _>>().unwrap();
    assert_eq!(rows.len(), 5);
    // Start configuration of the scenario, and the tip on the goal.
    assert_eq!((rows[0].q1, rows[0].q2), (0.3, 0.8));
    assert!((rows[4].x + 0.2).hypot(rows[4].y - 0.5) < 1e-4);
    for (i, r) in rows.iter().enumerate() {
        assert_eq!(r.k, i);
        // Planar two-link forward kinematics with l1 = 0.42, l2 = 0.33 (the scenario's links).
        let x = 0.42 * r.q1.cos() + 0.33 * (r.q1 + r.q2).cos();
        let y = 0.42 * r.q1.sin() + 0.33 * (r.q1 + r.q2).sin();
        assert!((x - r.x).abs() < 1e-9 && (y - r.y).abs() < 1e-9);
    }
    // Same seed, same CSV.
    let out2 = d.join("again.svg");
    let st = bin()
        .args([
            "plan",
            "experiments/scenarios/table-2link-4obs.toml",
            "--seed",
            "3",
            "--goal=-0.2,0.5",
            "--out",
        ])
        .arg(&out2)
        .status()
        .unwrap();
    assert!(st.success());
    assert_eq!(
        std::fs::read(d.join("demo.csv")).unwrap(),
        std::fs::read(d.join("again.csv")).unwrap()
    );
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn bad_plan_settings_exit_2_with_the_key() {
    let d = scratch("bad");
    let spec = d.join("spec.toml");
    std::fs::write(&spec, "[plan]\nwaypoints = 1\n").unwrap();
    let o = bin()
        .args([
            "plan",
            "experiments/scenarios/table-2link-4obs.toml",
            "--out",
        ])
        .arg(d.join("x.svg"))
        .arg("--spec")
        .arg(&spec)
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8(o.stderr).unwrap();
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(err.contains("spec.toml:2: plan.waypoints"), "{err}");
    // A missing scenario file is bad input too.
    let o = bin()
        .args(["plan", "nope.toml", "--out"])
        .arg(d.join("x.svg"))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    assert!(!d.join("x.svg").exists());
    std::fs::remove_dir_all(&d).unwrap();
}
