//! `termwise simulate`: run an open-loop input sequence through a scenario and write the state trace,
//! so users (and independent checks) can compare the dynamics with their own derivation.

use super::env::{ArmEnv, ArmState};
use super::scenario::Scenario;
use crate::config::ConfigError;
use std::fmt::Write as _;
use std::path::Path;
use std::sync::Arc;

/// Why a simulation could not run.
#[derive(Debug, thiserror::Error)]
pub enum SimulateError {
    /// The scenario file is invalid.
    #[error("{0}")]
    Scenario(#[from] ConfigError),
    /// The inputs file is malformed.
    #[error("{file}:{line}: {message}")]
    Inputs {
        file: String,
        line: usize,
        message: String,
    },
    /// The state turned non-finite (NaN or infinite) under the inputs; nothing is written.
    #[error("{file}: the arm's state became non-finite at control step {step} (t = {t} s, input row {step}); the inputs drive the arm beyond what the simulation can represent: lower them, or set tau_max / acc_max in the scenario")]
    NonFinite { file: String, step: usize, t: f64 },
    /// Reading or writing failed.
    #[error("{file}: {source}")]
    Io {
        file: String,
        source: std::io::Error,
    },
}

impl SimulateError {
    /// True when the user's input is at fault (exit code 2).
    pub fn is_bad_input(&self) -> bool {
        !matches!(self, SimulateError::Io { .. })
    }
}

/// Parse an inputs CSV (header `u1,...,uN`, one row per control step) into rows of N numbers.
pub fn parse_inputs(text: &str, n: usize, file: &str) -> Result<Vec<Vec<f64>>, SimulateError> {
    let bad = |line: usize, message: String| SimulateError::Inputs {
        file: file.to_string(),
        line,
        message,
    };
    let mut lines = text
        .lines()
        .enumerate()
        .filter(|(_, l)| !l.trim().is_empty());
    let (_, header) = lines
        .next()
        .ok_or_else(|| bad(1, "empty file; expected a header `u1,...,uN`".into()))?;
    let want: Vec<String> = (1..=n).map(|i| format!("u{i}")).collect();
    let got: Vec<&str> = header.split(',').map(|s| s.trim()).collect();
    if got != want {
        return Err(bad(
            1,
            format!(
                "header must be `{}` for a {n}-joint arm, got `{}`",
                want.join(","),
                header.trim()
            ),
        ));
    }
    let mut rows = Vec::new();
    for (i, l) in lines {
        let cells: Vec<&str> = l.split(',').collect();
        if cells.len() != n {
            return Err(bad(
                i + 1,
                format!("expected {n} columns, found {}", cells.len()),
            ));
        }
        let mut row = Vec::with_capacity(n);
        for (j, c) in cells.iter().enumerate() {
            let v: f64 = c.trim().parse().map_err(|_| {
                bad(
                    i + 1,
                    format!("column u{} is not a number: `{}`", j + 1, c.trim()),
                )
            })?;
            if !v.is_finite() {
                return Err(bad(
                    i + 1,
                    format!("column u{} must be finite, got {v}", j + 1),
                ));
            }
            row.push(v);
        }
        rows.push(row);
    }
    Ok(rows)
}

/// Run `inputs` from the scenario's start state (each row held for one control step). Returns the CSV text:
/// header `t,q1..qN,dq1..dqN,ee_x,ee_y,energy,min_clearance`, a row at t = 0, then one after every control step.
pub fn simulate_csv(sc: Arc<Scenario>, inputs: &[Vec<f64>]) -> String {
    simulate_rows(sc, inputs, false).unwrap_or_else(|_| unreachable!("no check asked"))
}

/// [`simulate_csv`], stopping with the (1-based) control step and its time at the first step whose state is
/// not finite when `check_finite` is set.
fn simulate_rows(
    sc: Arc<Scenario>,
    inputs: &[Vec<f64>],
    check_finite: bool,
) -> Result<String, (usize, f64)> {
    let n = sc.n();
    let mut env = ArmEnv::new(sc.clone());
    let mut start = ArmState::at_rest(&sc.start_q);
    start.dq[..n].copy_from_slice(&sc.start_dq);
    let first = env.reset(start, sc.goal, 0);
    let mut out = String::new();
    out.push('t');
    for i in 1..=n {
        let _ = write!(out, ",q{i}");
    }
    for i in 1..=n {
        let _ = write!(out, ",dq{i}");
    }
    out.push_str(",ee_x,ee_y,energy,min_clearance\n");
    let mut row = |t: f64, q: &[f64], dq: &[f64], ee: [f64; 2], clear: f64| {
        let _ = write!(out, "{t}");
        for v in &q[..n] {
            let _ = write!(out, ",{v}");
        }
        for v in &dq[..n] {
            let _ = write!(out, ",{v}");
        }
        let e = sc.arm.energy(q, dq);
        let _ = writeln!(out, ",{},{},{e},{clear}", ee[0], ee[1]);
    };
    row(0.0, &first.q, &first.dq, first.ee, first.min_clearance);
    for (k, u) in inputs.iter().enumerate() {
        let r = env.step(u);
        // Time from the step count, so long runs do not accumulate rounding in t.
        let t = (k + 1) as f64 * sc.control_dt();
        if check_finite && !r.q[..n].iter().chain(&r.dq[..n]).all(|v| v.is_finite()) {
            return Err((k + 1, t));
        }
        row(t, &r.q, &r.dq, r.ee, r.min_clearance);
    }
    Ok(out)
}

/// The whole `simulate` command: read the scenario and inputs, simulate, write the states atomically.
pub fn run_simulate(scenario: &Path, inputs: &Path, out: &Path) -> Result<usize, SimulateError> {
    let sc = Arc::new(Scenario::load(scenario)?);
    let file = inputs.display().to_string();
    let text = std::fs::read_to_string(inputs).map_err(|source| SimulateError::Io {
        file: file.clone(),
        source,
    })?;
    let rows = parse_inputs(&text, sc.n(), &file)?;
    let csv = simulate_rows(sc, &rows, true).map_err(|(step, t)| SimulateError::NonFinite {
        file,
        step,
        t,
    })?;
    crate::fsio::write_atomic(out, csv.as_bytes()).map_err(|source| SimulateError::Io {
        file: out.display().to_string(),
        source,
    })?;
    Ok(rows.len())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn inputs_errors_name_the_line() {
        let e = parse_inputs("u1,u2\n1,2\n3\n", 2, "in.csv").unwrap_err();
        assert_eq!(e.to_string(), "in.csv:3: expected 2 columns, found 1");
        let e = parse_inputs("u1,u2\n1,x\n", 2, "in.csv").unwrap_err();
        assert!(
            e.to_string()
                .starts_with("in.csv:2: column u2 is not a number"),
            "{e}"
        );
        let e = parse_inputs("a,b\n", 2, "in.csv").unwrap_err();
        assert!(e.to_string().contains("header must be `u1,u2`"), "{e}");
        assert_eq!(
            parse_inputs("u1\n0.5\n-1\n", 1, "f").unwrap(),
            vec![vec![0.5], vec![-1.0]]
        );
    }
}
