//! Unit tests of the study summary.

use super::*;
use crate::analysis::metric::{EPISODE_STEPS, REACHED};

fn curve(values: &[f64]) -> Curve {
    let e = |x: f64| Estimate {
        point: x,
        lo: x,
        hi: x,
    };
    Curve {
        steps: (0..values.len() as u64).map(|k| k * 100).collect(),
        points: values
            .iter()
            .map(|&x| PointStat {
                n: 1,
                mean: e(x),
                iqm: e(x),
            })
            .collect(),
    }
}

fn curves(length: &[f64], collision: &[f64], reached: &[f64]) -> BTreeMap<MetricId, Curve> {
    [
        (EPISODE_STEPS, curve(length)),
        (COLLISION, curve(collision)),
        (REACHED, curve(reached)),
    ]
    .into_iter()
    .collect()
}

#[test]
fn crash_check_flags_shorter_episodes_through_contact_not_through_reaching() {
    // The rule stated in the report (no published source; a reading of learning curves chosen
    // for termwise): length down >= 10%, collision rate up >= 0.1, and the length drop larger
    // than the rise of the reached rate (the most that newly reached goals can explain).
    let opts = AnalysisOptions::default();
    // Crashing: episodes 200 -> 120 steps, contact 0.1 -> 0.5, reached flat at 0.3.
    let crash = curves(
        &[200.0, 190.0, 150.0, 120.0, 120.0],
        &[0.1, 0.1, 0.3, 0.5, 0.5],
        &[0.3, 0.3, 0.3, 0.3, 0.3],
    );
    let f = crash_check(&crash, 2, &opts).expect("flagged");
    assert_eq!(f.from_step, 0);
    assert!((f.length_drop - 0.4).abs() < 1e-12);
    assert!((f.collision_rise - 0.4).abs() < 1e-12);
    // Learning to reach, touching obstacles on the way: shorter because the goal is reached.
    let reach = curves(
        &[200.0, 190.0, 150.0, 120.0, 120.0],
        &[0.1, 0.1, 0.3, 0.5, 0.5],
        &[0.1, 0.2, 0.5, 0.8, 0.8],
    );
    assert!(crash_check(&reach, 2, &opts).is_none());
    // Contact rises but episodes keep their length: not this pattern.
    let long = curves(
        &[200.0, 200.0, 200.0, 198.0, 199.0],
        &[0.1, 0.1, 0.3, 0.5, 0.5],
        &[0.3, 0.3, 0.3, 0.3, 0.3],
    );
    assert!(crash_check(&long, 2, &opts).is_none());
}

#[test]
fn verdict_needs_the_whole_interval_on_one_side() {
    let e = |point, lo, hi| Estimate { point, lo, hi };
    let base = e(0.6, 0.42, 0.75);
    assert_eq!(
        verdict(&e(0.9, 0.8, 0.95), &base, true),
        Some(Verdict::Better)
    );
    assert_eq!(
        verdict(&e(0.9, 0.7, 0.95), &base, true),
        Some(Verdict::Unclear)
    );
    assert_eq!(
        verdict(&e(0.2, 0.1, 0.3), &base, true),
        Some(Verdict::Worse)
    );
    // Lower is better (collision rate): the same interval is now worse.
    assert_eq!(
        verdict(&e(0.9, 0.8, 0.95), &base, false),
        Some(Verdict::Worse)
    );
    // A baseline figure without an interval is compared as a point.
    assert_eq!(
        verdict(&e(2.0, 1.8, 2.2), &e(2.5, f64::NAN, f64::NAN), false),
        Some(Verdict::Better)
    );
}
