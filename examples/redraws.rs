//! How often an episode's start and goal have no collision-free path between them in each shipped experiment's
//! scenario: draws 1000 full-task evaluation episodes (as `task::begin_eval` does) and prints the rejected draws
//! per 1000 episodes and the time it took.
//!
//! `cargo run --release --example redraws [-- EXPERIMENT.toml ...]` (default: every file in experiments/).

use std::path::PathBuf;
use std::time::Instant;
use termwise::study::experiment;
use termwise::task::begin_eval;

fn main() {
    let mut files: Vec<PathBuf> = std::env::args().skip(1).map(PathBuf::from).collect();
    if files.is_empty() {
        let mut all: Vec<PathBuf> = std::fs::read_dir("experiments")
            .expect("run from the repository root")
            .filter_map(|e| e.ok().map(|e| e.path()))
            .filter(|p| p.extension().is_some_and(|x| x == "toml"))
            .collect();
        all.sort();
        files = all;
    }
    for f in files {
        let exp = match experiment::load(&f) {
            Ok(e) => e,
            Err(e) => {
                eprintln!("{}: {e}", f.display());
                continue;
            }
        };
        let v = &exp.variants[0];
        let mut ep = v.episode();
        let t = Instant::now();
        let (mut redraws, mut needed, mut unsolved) = (0, 0, 0);
        for j in 0..1000 {
            let r = begin_eval(&mut ep, 12_345, j);
            redraws += r.redraws;
            needed += (r.redraws > 0) as usize;
            unsolved += r.unsolved as usize;
        }
        println!(
            "{:<28} scenario {:<22} per 1000 episodes: {:>4} needed a redraw, {:>5} draws rejected, {} unsolved; {:.1} ms per episode draw",
            f.file_name().unwrap().to_string_lossy(),
            v.scenario.name,
            needed,
            redraws,
            unsolved,
            t.elapsed().as_secs_f64()
        );
    }
}
