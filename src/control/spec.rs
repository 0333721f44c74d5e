//! The `[baseline]` table of an experiment: gains and time-scaling of the classical tracking controller,
//! read with serde (unknown keys are errors) and checked by `validate` with key-path messages.

use super::profile::TimeScaling;
use crate::config::ConfigError;
use serde::{Deserialize, Serialize};

/// A gain given once for all joints (`kp = 400.0`) or per joint (`kp = [400.0, 300.0]`).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum Gains {
    All(f64),
    PerJoint(Vec<f64>),
}

impl Gains {
    /// The gain of joint i (a per-joint list must have been checked against the arm, see `check_joints`).
    pub fn get(&self, i: usize) -> f64 {
        match self {
            Gains::All(g) => *g,
            Gains::PerJoint(v) => v[i],
        }
    }

    fn values(&self) -> &[f64] {
        match self {
            Gains::All(g) => std::slice::from_ref(g),
            Gains::PerJoint(v) => v,
        }
    }
}

/// Settings of the classical baseline (`[baseline]`; every key optional).
///
/// The controller drives the tracking error e = q_ref - q with the reference acceleration plus PD feedback,
/// v = ddq_ref + kd e' + kp e: in acceleration mode v is the action; in torque mode the action is the
/// computed torque M(q) v + C(q, dq) dq + G(q) + B dq. With an exact model either makes each joint's error obey
/// e'' + kd e' + kp e = 0 (Spong, Hutchinson & Vidyasagar, "Robot Modeling and Control", 2006, sec. 8.3).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct BaselineSpec {
    /// Proportional gain, 1/s^2, scalar or one per joint. Default 400 (natural frequency 20 rad/s, well
    /// below the Nyquist rate of the 10 ms control step).
    pub kp: Gains,
    /// Derivative gain, 1/s, scalar or one per joint. Default: none, meaning critical damping kd = 2 sqrt(kp).
    pub kd: Option<Gains>,
    /// Time-scaling between waypoints: "trapezoid" (default; fastest under the limits) or "quintic" (smooth).
    pub time_scaling: TimeScaling,
    /// Fraction of each joint's speed limit v_max the reference may use, in (0, 1]. Default 0.9.
    pub speed_fraction: f64,
    /// Fraction of each joint's acceleration limit acc_max the reference may use, in (0, 1]; the rest is left
    /// to the feedback. Default 0.7.
    pub accel_fraction: f64,
    /// Shortest time over which a start velocity that does not point along a new path is faded out, s, >= 0.
    /// Default 0.1. (Longer when the leftover velocity needs it: see `Trajectory::new`.)
    pub blend_time: f64,
    /// Clearance the controller's own route keeps from obstacles, the boundary and (when enabled) the arm itself,
    /// m, > 0: it must cover the controller's tracking error. It also replans from where it is when its clearance
    /// falls below half of this. When no route keeps it, the margin is halved down to the planner's
    /// `plan.clearance_margin`. Default 0.02: the largest tracking deviation of any joint point of the arm from its
    /// timed reference over the quickstart's 30 evaluation episodes measured 2.2 mm (`tests/all/control_route.rs`);
    /// the spline through the route's corners is accepted when it keeps half the margin, so 0.02 leaves 1 cm for
    /// it and a factor of about 4 over the tracking deviation (our choice, no published source).
    pub clearance: f64,
}

impl Default for BaselineSpec {
    fn default() -> Self {
        BaselineSpec {
            kp: Gains::All(400.0),
            kd: None,
            time_scaling: TimeScaling::Trapezoid,
            speed_fraction: 0.9,
            accel_fraction: 0.7,
            blend_time: 0.1,
            clearance: 0.02,
        }
    }
}

impl BaselineSpec {
    /// Check every value; errors name the key (`baseline.kp`, ...) and the line of `src` when it is found.
    pub fn validate(&self, origin: &str, src: &str) -> Result<(), ConfigError> {
        let err =
            |key: &str, msg: String| ConfigError::at(origin, src, &format!("baseline.{key}"), msg);
        let check_gains = |key: &str, g: &Gains, strict: bool| -> Result<(), ConfigError> {
            let vals = g.values();
            if vals.is_empty() {
                return Err(err(
                    key,
                    "needs a number or a non-empty list, one per joint".into(),
                ));
            }
            for v in vals {
                let ok = v.is_finite() && if strict { *v > 0.0 } else { *v >= 0.0 };
                if !ok {
                    let want = if strict { "> 0" } else { ">= 0" };
                    return Err(err(
                        key,
                        format!("gains must be finite and {want}, got {v}"),
                    ));
                }
            }
            Ok(())
        };
        check_gains("kp", &self.kp, true)?;
        if let Some(kd) = &self.kd {
            check_gains("kd", kd, false)?;
        }
        for (key, v) in [
            ("speed_fraction", self.speed_fraction),
            ("accel_fraction", self.accel_fraction),
        ] {
            if !(v.is_finite() && v > 0.0 && v <= 1.0) {
                return Err(err(key, format!("must be in (0, 1], got {v}")));
            }
        }
        if !(self.clearance.is_finite() && self.clearance > 0.0 && self.clearance <= 0.5) {
            return Err(err(
                "clearance",
                format!("must be a distance in (0, 0.5] m, got {}", self.clearance),
            ));
        }
        if !(self.blend_time.is_finite() && self.blend_time >= 0.0) {
            return Err(err(
                "blend_time",
                format!(
                    "must be a finite number of seconds >= 0, got {}",
                    self.blend_time
                ),
            ));
        }
        Ok(())
    }

    /// Check that per-joint gain lists match an arm of `n` joints.
    pub fn check_joints(&self, n: usize, origin: &str, src: &str) -> Result<(), ConfigError> {
        let gains = [("kp", Some(&self.kp)), ("kd", self.kd.as_ref())];
        for (key, g) in gains {
            if let Some(Gains::PerJoint(v)) = g {
                if v.len() != n {
                    return Err(ConfigError::at(
                        origin,
                        src,
                        &format!("baseline.{key}"),
                        format!(
                            "the arm has {n} joints but {} gains are given; give one number or {n}",
                            v.len()
                        ),
                    ));
                }
            }
        }
        Ok(())
    }

    /// Proportional gain of joint i, 1/s^2.
    pub fn kp_of(&self, i: usize) -> f64 {
        self.kp.get(i)
    }

    /// Derivative gain of joint i, 1/s (critical damping 2 sqrt(kp) when `kd` is not given).
    pub fn kd_of(&self, i: usize) -> f64 {
        match &self.kd {
            Some(g) => g.get(i),
            None => 2.0 * self.kp.get(i).sqrt(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Deserialize)]
    #[serde(deny_unknown_fields)]
    struct Doc {
        #[serde(default)]
        baseline: BaselineSpec,
    }

    fn parse(src: &str) -> Result<BaselineSpec, ConfigError> {
        let d: Doc = crate::config::parse_toml(src, "exp.toml")?;
        d.baseline.validate("exp.toml", src)?;
        Ok(d.baseline)
    }

    #[test]
    fn defaults_and_overrides() {
        let s = parse("").unwrap();
        assert_eq!(s, BaselineSpec::default());
        assert_eq!(s.kd_of(1), 40.0); // 2 sqrt(400)
        let s = parse("[baseline]\nkp = [100, 225.0]\ntime_scaling = \"quintic\"\n").unwrap();
        assert_eq!((s.kp_of(0), s.kp_of(1), s.kd_of(1)), (100.0, 225.0, 30.0));
        assert_eq!(s.time_scaling, TimeScaling::Quintic);
        let s = parse("[baseline]\nkp = 400\nkd = 25.5\n").unwrap();
        assert_eq!(s.kd_of(0), 25.5);
    }

    #[test]
    fn bad_values_name_the_key() {
        let e = parse("[baseline]\nspeed_fraction = 1.5\n").unwrap_err();
        assert_eq!(e.path, "baseline.speed_fraction");
        assert_eq!(e.line, Some(2));
        assert!(e.message.contains("(0, 1]"), "{e}");
        let e = parse("[baseline]\nkp = [400.0, -1.0]\n").unwrap_err();
        assert!(e.path == "baseline.kp" && e.message.contains("> 0"), "{e}");
        let e = parse("[baseline]\nkd = []\n").unwrap_err();
        assert!(e.path == "baseline.kd", "{e}");
        let e = parse("[baseline]\nkpp = 3.0\n").unwrap_err();
        assert!(e.to_string().contains("unknown field"), "{e}");
        let e = parse("[baseline]\ntime_scaling = \"cubic\"\n").unwrap_err();
        assert!(e.to_string().contains("baseline.time_scaling"), "{e}");
        let s = parse("[baseline]\nkp = [1.0, 2.0, 3.0]\n").unwrap();
        let e = s.check_joints(2, "exp.toml", "").unwrap_err();
        assert!(e.message.contains("2 joints"), "{e}");
    }
}
