//! term_contributions.csv: each reward term's mean per-episode contribution at each evaluation of a run
//! (`env_steps`, then one column per term in the composer's order).

use super::{csv_buffer, csv_error, finish_csv, ResultsError, TERM_CONTRIBUTIONS_FILE};
use std::path::Path;

/// The table in memory.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct TermTable {
    /// Term names in column order.
    pub names: Vec<String>,
    /// Environment steps of each row.
    pub steps: Vec<u64>,
    /// `values[row][term]`.
    pub values: Vec<Vec<f64>>,
}

/// Write term_contributions.csv.
pub fn write_terms(dir: &Path, table: &TermTable) -> Result<(), ResultsError> {
    let p = dir.join(TERM_CONTRIBUTIONS_FILE);
    let mut w = csv_buffer();
    let header = std::iter::once("env_steps").chain(table.names.iter().map(String::as_str));
    w.write_record(header).map_err(csv_error(&p))?;
    for (steps, values) in table.steps.iter().zip(&table.values) {
        let row = std::iter::once(steps.to_string()).chain(values.iter().map(|v| v.to_string()));
        w.write_record(row).map_err(csv_error(&p))?;
    }
    finish_csv(&p, w)
}

/// Read term_contributions.csv: `env_steps` then one column per reward term.
pub fn read_terms(path: &Path) -> Result<TermTable, ResultsError> {
    let mut reader = csv::Reader::from_path(path).map_err(csv_error(path))?;
    let header = reader.headers().map_err(csv_error(path))?.clone();
    if header.get(0) != Some("env_steps") {
        return Err(ResultsError::BadHeader {
            path: path.to_path_buf(),
            expected: "env_steps,<term>...".into(),
            found: header.iter().collect::<Vec<_>>().join(","),
        });
    }
    let mut table = TermTable {
        names: header.iter().skip(1).map(str::to_string).collect(),
        ..TermTable::default()
    };
    for record in reader.records() {
        let record = record.map_err(csv_error(path))?;
        let parse = |s: &str| -> Result<f64, ResultsError> {
            s.trim()
                .parse::<f64>()
                .map_err(|_| ResultsError::BadNumber {
                    path: path.to_path_buf(),
                    text: s.to_string(),
                })
        };
        let steps = parse(record.get(0).unwrap_or(""))?;
        let values = record
            .iter()
            .skip(1)
            .map(parse)
            .collect::<Result<Vec<_>, _>>()?;
        table.steps.push(steps as u64);
        table.values.push(values);
    }
    Ok(table)
}
