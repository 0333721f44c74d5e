//! An error with its causes on one line, the way every termwise error reaches a person: the command line's
//! single error path (`cmd`) and the notes of `termwise status` use it, so the operating system's reason
//! behind an I/O error is never lost.

use std::error::Error;

/// An error and its causes (`Error::source`) on one line, `top: cause: cause`. A cause whose text the line
/// already holds (an error that formats its source into its own message) is not repeated.
pub fn error_chain_text(e: &(dyn Error + 'static)) -> String {
    let mut line = e.to_string();
    let mut cause = e.source();
    while let Some(c) = cause {
        let text = c.to_string();
        if !text.is_empty() && !line.contains(&text) {
            line.push_str(": ");
            line.push_str(&text);
        }
        cause = c.source();
    }
    line
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Debug, thiserror::Error)]
    #[error("cannot read {0}")]
    struct Outer(&'static str, #[source] std::io::Error);

    #[derive(Debug, thiserror::Error)]
    #[error("report failed")]
    struct Top(#[source] Outer);

    #[derive(Debug, thiserror::Error)]
    #[error("{path}: {source}")]
    struct SaysItsCause {
        path: &'static str,
        source: std::io::Error,
    }

    // Common practice, no outside source: the chain is Display of each error from `Error::source`, top first.
    #[test]
    fn chain_shows_every_cause_once() {
        let io = std::io::Error::new(std::io::ErrorKind::PermissionDenied, "permission denied");
        let e = Top(Outer("runs/a/run.json", io));
        assert_eq!(
            error_chain_text(&e),
            "report failed: cannot read runs/a/run.json: permission denied"
        );
        // An error that already prints its cause does not print it twice.
        let io = std::io::Error::new(std::io::ErrorKind::NotFound, "no such file");
        let e = SaysItsCause {
            path: "x.csv",
            source: io,
        };
        assert_eq!(error_chain_text(&e), "x.csv: no such file");
    }

    #[test]
    fn os_reason_reaches_the_line() {
        // A real missing file: the line must end with the operating system's reason.
        let missing = std::env::temp_dir().join("termwise-no-such-dir-for-chain/study.json");
        let io = std::fs::read_to_string(&missing).unwrap_err();
        let reason = io.to_string();
        let e = Top(Outer("study.json", io));
        let line = error_chain_text(&e);
        assert!(line.ends_with(&reason), "{line}");
        assert!(!reason.is_empty());
    }
}
