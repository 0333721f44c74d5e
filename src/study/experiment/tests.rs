//! Unit tests of experiment parsing helpers.

use super::*;

#[test]
fn fnv1a_known_value() {
    // FNV-1a 64 of "a" is 0xaf63dc4c8601ec8c (Fowler/Noll/Vo reference test vectors, from memory);
    // our variant appends a separator byte per part, so check the raw algorithm on one part without it.
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    h ^= b'a' as u64;
    h = h.wrapping_mul(0x0000_0100_0000_01b3);
    assert_eq!(h, 0xaf63_dc4c_8601_ec8c);
    assert_ne!(fnv1a_hex(&[b"ab"]), fnv1a_hex(&[b"a", b"b"]));
}

#[test]
fn merge_and_diff() {
    let mut base: Table =
        toml::from_str("[reward.time]\nweight = 1.0\ncost = 0.01\n[reward.goal]\nweight = 1.0\n")
            .unwrap();
    let over: Table = toml::from_str("[reward.time]\nweight = 0.0\n").unwrap();
    let orig = base.clone();
    deep_merge(&mut base, &over);
    assert_eq!(base["reward"]["time"]["cost"].as_float(), Some(0.01));
    let d = diff(&orig, &base);
    assert_eq!(
        d,
        vec![Change {
            key: "reward.time.weight".into(),
            base: "1.0".into(),
            value: "0.0".into()
        }]
    );
}

#[test]
fn safe_names() {
    assert!(safe_name("without-waypoint_progress"));
    assert!(!safe_name("../etc"));
    assert!(!safe_name("a b"));
    assert!(!safe_name(""));
}
