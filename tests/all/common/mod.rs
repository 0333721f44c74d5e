//! Shared helpers for the integration tests and benches.
pub mod reach_env;
