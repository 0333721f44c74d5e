//! PLACEHOLDER (not committed): replaced by the helper's module at merge.
use crate::plan::{PlanSpec, ReferencePath};
use crate::sim::{ArmEnv, Scenario};
#[derive(Debug)]
pub struct WaypointModel;
impl WaypointModel {
    pub fn load(dir: &std::path::Path) -> Result<WaypointModel, String> {
        Err(format!("placeholder {}", dir.display()))
    }
    pub fn check_fits(&self, _s: &Scenario, _p: &PlanSpec) -> Result<(), String> {
        Err("placeholder".into())
    }
    pub fn predict(&self, _env: &ArmEnv, _q: &[f64], _goal: [f64; 2]) -> ReferencePath {
        unimplemented!()
    }
}
