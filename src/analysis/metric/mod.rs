//! The evaluation metrics as one declarative list: for each column of evaluations.csv, what it means, which way
//! is better, how it was formed from the evaluation episodes, how it aggregates over runs and seeds, and where
//! it is shown. The summary, summary.csv, the report's tables and sentences, the terminal ranking and the
//! per-metric curves all iterate over [`METRICS`]; none of them names a column.
//!
//! A new evaluation column is the `results::EvalRow` field (with the line filling it in `task::metrics`) plus
//! one entry in `list.rs`, starting from `..Metric::ON_DISK`: `last: Some(..)` gives it a final figure
//! (summary.csv columns `<key>_n`, `_iqm`, `_iqm_lo`, ... and a column of the report's summary table),
//! `curve: Some(..)` a learning curve (drawn in a chart of its own with `CurveChart::Own`), `yardstick`,
//! `terminal` and `ranking` a place in the report's sentences and ranking tables. The tests below check that
//! every column has an entry.

use crate::results::EvalRow;

mod list;
pub use list::METRICS;

/// Which way a metric is better.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Better {
    Higher,
    Lower,
    /// No direction across variants (a return depends on the reward; a length or count is context).
    Neither,
}

/// How an evaluation row's value was formed from its evaluation episodes (`task::metrics::EvalSummary`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum OverEpisodes {
    /// The fraction of episodes with an outcome. A deterministic controller's figure then carries a Wilson
    /// interval over its episodes instead of a spread over seeds.
    Proportion,
    /// The mean over the episodes.
    Mean,
    /// The mean over the episodes that reached the goal (NaN when none did).
    MeanOfReached,
    /// The smallest value over all episodes.
    Min,
    /// A state of training at the evaluation, not a property of the episodes.
    Training,
}

/// A metric's final figure: per run the mean over its last evaluations (the study's final window, NaN rows
/// left out), across a variant's runs the IQM and the mean, each with a stratified bootstrap interval.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Final {
    /// Prefix of its summary.csv columns.
    pub key: &'static str,
    /// Label of its bootstrap streams (each figure has its own, so adding a figure changes no other number).
    pub stream: u64,
    /// The figure of a diverged run: a policy after divergence reaches nothing, so a rate of reaching is 0;
    /// `None` leaves it undefined.
    pub diverged: Option<f64>,
}

/// A metric's learning curve: IQM and mean across seeds at every evaluation step, with bootstrap intervals.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CurveSpec {
    /// Label of its bootstrap streams.
    pub stream: u64,
    /// Where it is drawn.
    pub chart: CurveChart,
}

/// Where a learning curve is drawn.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum CurveChart {
    /// Computed (for the checks of the summary) but not drawn.
    None,
    /// A panel of the learning-curves figure (the headline figure: its caption describes its panels).
    Panel(Panel),
    /// A chart of its own, with its caption.
    Own(OwnChart),
}

/// One plot of a learning curve.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Panel {
    /// Title over the plot.
    pub title: &'static str,
    /// Label of the y axis, with the unit.
    pub y_label: &'static str,
    /// Fixed y range (None: from the data).
    pub range: Option<(f64, f64)>,
}

/// A chart showing one metric's learning curve.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct OwnChart {
    /// File stem under charts/.
    pub stem: &'static str,
    /// What the chart answers, printed under it in the report.
    pub caption: &'static str,
    /// The chart's heading (a question) and the line under it.
    pub title: &'static str,
    pub subtitle: &'static str,
    /// The plot.
    pub panel: Panel,
    /// Pixel size (width, height).
    pub size: (u32, u32),
    /// Which variants it draws (no chart when none qualifies).
    pub variants: Shown,
}

/// Which variants a metric's own chart draws.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Shown {
    /// Every variant, the classical controller as a flat line.
    All,
    /// Learned variants with a named curriculum or a curve that changes over training.
    Curriculum,
}

/// One evaluation metric.
#[derive(Clone, Copy, Debug)]
pub struct Metric {
    /// The evaluations.csv column it reads (the `EvalRow` field's header name).
    pub column: &'static str,
    /// Its value in a row.
    pub value: fn(&EvalRow) -> f64,
    /// Its name in sentences ("RMS joint acceleration").
    pub name: &'static str,
    /// Its column head in the report's summary table.
    pub head: &'static str,
    /// The unit, or what it counts, under the head ("" for none).
    pub unit: &'static str,
    /// Which way is better.
    pub better: Better,
    /// How a row's value was formed from the evaluation episodes.
    pub episodes: OverEpisodes,
    /// Its final figure (None: not aggregated).
    pub last: Option<Final>,
    /// Its learning curve (None: none).
    pub curve: Option<CurveSpec>,
    /// Compared with the classical controller in the report's yardstick sentence (needs a direction).
    pub yardstick: bool,
    /// Its column head in the terminal ranking (None: not shown there).
    pub terminal: Option<&'static str>,
    /// Its column head and the line under it in the report's ranking table (None: not shown there).
    pub ranking: Option<(&'static str, &'static str)>,
}

impl Metric {
    /// A column on disk only: no final figure, no curve, shown nowhere. Entries start from it.
    pub const ON_DISK: Metric = Metric {
        column: "",
        value: |_| f64::NAN,
        name: "",
        head: "",
        unit: "",
        better: Better::Neither,
        episodes: OverEpisodes::Mean,
        last: None,
        curve: None,
        yardstick: false,
        terminal: None,
        ranking: None,
    };

    /// Position of the metric reading `column` in [`METRICS`], at compile time (a misspelt name does not build).
    pub const fn id(column: &str) -> MetricId {
        let mut i = 0;
        while i < METRICS.len() {
            if str_eq(METRICS[i].column, column) {
                return MetricId(i);
            }
            i += 1;
        }
        panic!("no metric reads this evaluations.csv column");
    }
}

const fn str_eq(a: &str, b: &str) -> bool {
    let (a, b) = (a.as_bytes(), b.as_bytes());
    if a.len() != b.len() {
        return false;
    }
    let mut i = 0;
    while i < a.len() {
        if a[i] != b[i] {
            return false;
        }
        i += 1;
    }
    true
}

/// A metric by its position in [`METRICS`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct MetricId(pub usize);

impl MetricId {
    /// The metric's entry.
    pub fn metric(self) -> &'static Metric {
        &METRICS[self.0]
    }
}

/// Clean success rate: the figure studies rank on.
pub const SUCCESS: MetricId = Metric::id("clean_success_rate");
/// Reached rate, contact allowed.
pub const REACHED: MetricId = Metric::id("reached_rate");
/// Collision rate.
pub const COLLISION: MetricId = Metric::id("collision_rate");
/// Mean episode length.
pub const EPISODE_STEPS: MetricId = Metric::id("episode_steps");
/// Mean return.
pub const RETURN: MetricId = Metric::id("mean_return");
/// Curriculum difficulty.
pub const CURRICULUM_LEVEL: MetricId = Metric::id("curriculum_level");

/// The metrics with a final figure, with their ids, in list order.
pub fn with_final() -> impl Iterator<Item = (MetricId, &'static Metric, &'static Final)> {
    METRICS
        .iter()
        .enumerate()
        .filter_map(|(i, m)| m.last.as_ref().map(|f| (MetricId(i), m, f)))
}

/// The metrics with a learning curve, with their ids, in list order.
pub fn with_curve() -> impl Iterator<Item = (MetricId, &'static Metric, &'static CurveSpec)> {
    METRICS
        .iter()
        .enumerate()
        .filter_map(|(i, m)| m.curve.as_ref().map(|c| (MetricId(i), m, c)))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::results::evaluation_columns;

    #[test]
    fn every_evaluation_column_has_exactly_one_entry_and_reads_its_own_field() {
        let columns = evaluation_columns();
        for c in columns.iter().filter(|c| *c != "env_steps") {
            let n = METRICS.iter().filter(|m| m.column == c).count();
            assert_eq!(
                n, 1,
                "evaluations.csv column '{c}' needs one entry in METRICS"
            );
        }
        for m in METRICS {
            assert!(columns.iter().any(|c| c == m.column), "{}", m.column);
        }
        // Each entry reads the field of its column: a row holding its column's position reads back that number.
        let mut text = columns.join(",");
        text.push('\n');
        let cells: Vec<String> = (0..columns.len()).map(|k| k.to_string()).collect();
        text.push_str(&cells.join(","));
        let mut reader = csv::Reader::from_reader(text.as_bytes());
        let row: EvalRow = reader.deserialize().next().unwrap().unwrap();
        for m in METRICS {
            let k = columns.iter().position(|c| c == m.column).unwrap();
            assert_eq!((m.value)(&row), k as f64, "{}", m.column);
        }
    }

    #[test]
    fn streams_keys_and_stems_are_distinct_and_shown_metrics_are_named() {
        let mut streams: Vec<u64> = with_final().map(|(_, _, f)| f.stream).collect();
        streams.push(10); // the AUC's, `summary::TAG_AUC`
        let n = streams.len();
        streams.sort_unstable();
        streams.dedup();
        assert_eq!(streams.len(), n, "final-figure streams must differ");
        let mut curves: Vec<u64> = with_curve().map(|(_, _, c)| c.stream).collect();
        let n = curves.len();
        curves.sort_unstable();
        curves.dedup();
        assert_eq!(curves.len(), n, "curve streams must differ");
        let mut keys: Vec<&str> = with_final().map(|(_, _, f)| f.key).collect();
        keys.push("auc");
        let n = keys.len();
        keys.sort_unstable();
        keys.dedup();
        assert_eq!(keys.len(), n, "summary.csv keys must differ");
        for m in METRICS {
            assert!(!m.name.is_empty(), "{}", m.column);
            if m.last.is_some() {
                assert!(!m.head.is_empty(), "{} needs a table head", m.column);
            }
            if m.yardstick {
                assert_ne!(m.better, Better::Neither, "{}", m.column);
                assert!(m.last.is_some(), "{}", m.column);
            }
            if m.terminal.is_some() || m.ranking.is_some() {
                assert!(m.last.is_some(), "{}", m.column);
            }
        }
    }

    #[test]
    fn named_ids_point_at_their_columns() {
        assert_eq!(SUCCESS.metric().column, "clean_success_rate");
        assert_eq!(REACHED.metric().column, "reached_rate");
        assert_eq!(COLLISION.metric().column, "collision_rate");
        assert_eq!(EPISODE_STEPS.metric().column, "episode_steps");
        assert_eq!(RETURN.metric().column, "mean_return");
        assert_eq!(CURRICULUM_LEVEL.metric().column, "curriculum_level");
        // The summary's checks read these curves.
        for id in [SUCCESS, REACHED, COLLISION, EPISODE_STEPS, RETURN] {
            assert!(id.metric().curve.is_some() && id.metric().last.is_some());
        }
        assert!(CURRICULUM_LEVEL.metric().curve.is_some());
    }
}
