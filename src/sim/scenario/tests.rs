//! Unit tests of scenario parsing and validation.

use super::*;

const BASE: &str = r#"
[arm]
control = "torque"
gravity = 9.81
[[arm.link]]
length = 0.5
mass = 1.0
[[arm.link]]
length = 0.4
mass = 0.8
[start]
q = [0.0, 0.0]
[goal]
position = [0.3, 0.3]
"#;

#[test]
fn defaults_are_uniform_rods() {
    let s = Scenario::from_toml_str(BASE, "t").unwrap();
    assert_eq!(s.n(), 2);
    assert!((s.arm.links[0].inertia - 1.0 * 0.25 / 12.0).abs() < 1e-15);
    assert!((s.arm.links[1].com - 0.2).abs() < 1e-15);
    assert_eq!(s.integrator, Integrator::Rk4);
}

fn bad(src: &str) -> String {
    Scenario::from_toml_str(src, "bad.toml")
        .unwrap_err()
        .to_string()
}

#[test]
fn bad_inputs_name_the_key() {
    let e = bad(&BASE.replace("mass = 0.8", "mass = -0.8"));
    assert!(e.contains("arm.link[1].mass") && e.contains("> 0"), "{e}");
    let e = bad(&BASE.replace("mass = 0.8", "mass = 0.8\nlenght = 3"));
    assert!(
        e.contains("unknown field") && e.contains("bad.toml:"),
        "{e}"
    );
    let e = bad(&BASE.replace("length = 0.4\n", ""));
    assert!(e.contains("missing field `length`"), "{e}");
    let e = bad(&BASE.replace("mass = 0.8", "mass = nan"));
    assert!(e.contains("arm.link[1].mass"), "{e}");
    let e = bad(&BASE.replace("mass = 0.8", "mass = 0.8\nq_min = 1.0\nq_max = -1.0"));
    assert!(e.contains("q_min") && e.contains("q_max"), "{e}");
    let e = bad(&format!(
        "{BASE}\n[[obstacle]]\nshape = \"disc\"\ncenter = [0.3, 0.0]\nradius = 0.1\n"
    ));
    assert!(e.contains("obstacle[0]") && e.contains("overlaps"), "{e}");
    let seven = "[[arm.link]]\nlength = 0.1\nmass = 0.1\n".repeat(7);
    let e = bad(&format!(
        "[arm]\ncontrol = \"torque\"\n{seven}[start]\nq = [0,0,0,0,0,0,0]\n[goal]\nposition = [0.1, 0.1]\n"
    ));
    assert!(e.contains("1 to 6"), "{e}");
}
