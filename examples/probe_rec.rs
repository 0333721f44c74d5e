use std::path::Path;
use termwise::replay::{record, Controller};
use termwise::study::experiment;
fn main() {
    let args: Vec<String> = std::env::args().collect();
    let exp = experiment::load(Path::new(&args[1])).unwrap();
    let v = exp
        .variants
        .iter()
        .find(|v| v.name == args[2])
        .unwrap()
        .clone();
    let pol = termwise::learn::checkpoint::load_policy(Path::new(&args[3])).unwrap();
    for j in args[4].split(',') {
        let j: u64 = j.parse().unwrap();
        let rec = record(&v, &Controller::Policy(&pol), exp.study.eval_seed, j);
        let n = rec.frames.len();
        let first = rec.frames.iter().position(|f| f.report.min_clearance < 0.0);
        println!(
            "ep {j}: {n} frames, first contact at {first:?}, waypoints {:?}",
            rec.frames[0].waypoints
        );
        for (k, f) in rec
            .frames
            .iter()
            .enumerate()
            .take(first.map(|k| k + 4).unwrap_or(0))
        {
            let r = &f.report;
            println!(
                "  {k:3} ee [{:.3},{:.3}] obst_c {:.4} goal_d {:.3} ee_vel [{:.2},{:.2}]",
                r.ee[0], r.ee[1], r.obstacle_clearance, r.goal_dist, r.ee_vel[0], r.ee_vel[1]
            );
        }
    }
}
