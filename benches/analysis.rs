//! Speed of the statistics behind every report: one stratified bootstrap IQM interval, and a whole
//! study summary of the fixture results folder (9 variants x 5 seeds x 11 evaluations).

use criterion::{criterion_group, criterion_main, Criterion};
use std::hint::black_box;
use std::path::Path;
use termwise::analysis::bootstrap::{stratified_bootstrap, BootstrapSpec};
use termwise::analysis::stats::iqm;
use termwise::analysis::{load_study, summarize, AnalysisOptions};

fn bootstrap_iqm(c: &mut Criterion) {
    let runs: Vec<f64> = (0..10).map(|i| (i as f64 * 0.37).sin()).collect();
    c.bench_function("bootstrap_iqm_10_seeds_2000_resamples", |b| {
        b.iter(|| {
            stratified_bootstrap(
                &[black_box(&runs)],
                |s| iqm(&s[0]),
                BootstrapSpec::default(),
                7,
            )
        })
    });
}

fn summarize_fixture(c: &mut Criterion) {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/study-small");
    let results = load_study(&dir).expect("fixture loads");
    c.bench_function("summarize_fixture_study", |b| {
        b.iter(|| summarize(black_box(&results), &AnalysisOptions::default()))
    });
}

// No criterion plots: plotters is built with the pure-Rust text path and no system fonts, on which
// criterion's own charts cannot find a font (our charts register an embedded one).
criterion_group! {
    name = benches;
    config = Criterion::default().without_plots();
    targets = bootstrap_iqm, summarize_fixture
}
criterion_main!(benches);
