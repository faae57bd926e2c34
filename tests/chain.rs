//! `regionkey chain` end to end on hand-built tables (arithmetic in the
//! comments; see src/core/chain.rs for the derivation).

use predicates::prelude::*;

mod common;
use common::regionkey;

#[test]
fn two_crosswalks_compose_into_the_direct_one() {
    // A strip [0, 10): x-layer A = [0, 4), B = [4, 10); middle M1 = [0, 4),
    // M2 = [4, 7), M3 = [7, 10); z-layer P = [0, 7), Q = [7, 10).
    // Direct x->z: A -> P weight 4/4, share 4/7; B -> P 3/6, 3/7; B -> Q 3/6, 3/3.
    let dir = tempfile::tempdir().unwrap();
    let xm = dir.path().join("xm.csv");
    let mz = dir.path().join("mz.csv");
    std::fs::write(
        &xm,
        "from_code,to_code,weight,target_share,basis\nA,M1,1,1,area\nB,M2,0.5,1,area\nB,M3,0.5,1,area\n",
    )
    .unwrap();
    std::fs::write(
        &mz,
        "from_code,to_code,weight,target_share,basis\nM1,P,1,0.571428571429,area\nM2,P,1,0.428571428571,area\nM3,Q,1,1,area\n",
    )
    .unwrap();
    let out = dir.path().join("xz.csv");
    regionkey()
        .args(["chain"])
        .arg(&xm)
        .arg(&mz)
        .arg("-o")
        .arg(&out)
        .assert()
        .success();
    let text = std::fs::read_to_string(&out).unwrap();
    assert_eq!(
        text,
        "from_code,to_code,weight,target_share,basis
A,P,1.000000000000,0.571428571429,area
B,P,0.500000000000,0.428571428571,area
B,Q,0.500000000000,1.000000000000,area
"
    );
    let meta: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("xz.csv.json")).unwrap())
            .unwrap();
    assert_eq!(meta["inputs"].as_array().unwrap().len(), 2);
    assert!(meta["caution"].as_str().unwrap().contains("estimates"));
}

#[test]
fn a_middle_code_missing_from_the_second_table_is_named() {
    let dir = tempfile::tempdir().unwrap();
    let xy = dir.path().join("xy.csv");
    let yz = dir.path().join("yz.csv");
    std::fs::write(&xy, "from_code,to_code,weight\nA,Y1,0.5\nA,Y2,0.5\n").unwrap();
    std::fs::write(&yz, "from_code,to_code,weight\nY1,Z,1\n").unwrap();
    regionkey()
        .args(["chain"])
        .arg(&xy)
        .arg(&yz)
        .args(["-o", "-"])
        .assert()
        .failure()
        .stderr(predicate::str::contains("Y2"))
        .stderr(predicate::str::contains("not source codes of the second"));
}

#[test]
fn weights_that_do_not_add_up_are_refused_with_the_file_named() {
    let dir = tempfile::tempdir().unwrap();
    let xy = dir.path().join("xy.csv");
    let yz = dir.path().join("yz.csv");
    std::fs::write(&xy, "from_code,to_code,weight\nA,Y1,0.7\n").unwrap();
    std::fs::write(&yz, "from_code,to_code,weight\nY1,Z,1\n").unwrap();
    regionkey()
        .args(["chain"])
        .arg(&xy)
        .arg(&yz)
        .args(["-o", "-"])
        .assert()
        .failure()
        .stderr(predicate::str::contains("xy.csv"))
        .stderr(predicate::str::contains("add up to 0.7"));
}

#[test]
fn composed_slivers_are_dropped_by_the_overlays_rule_and_reported() {
    // Guards: a chained crosswalk kept thousands of pairs under 1e-3 that
    // the direct overlay drops as slivers. A strip [0, 10000): x-layer
    // A = [0, 10000); middle M1 = [0, 9995), M2 = [9995, 10000) (a boundary
    // drawn 5 units off); z-layer P = [0, 9995), Q = [9995, 20000).
    // A -> M2 -> Q: weight 5/10000 = 0.0005, target share 5/10005 < 0.001:
    // a sliver of both A and Q.
    let dir = tempfile::tempdir().unwrap();
    let xm = dir.path().join("xm.csv");
    let mz = dir.path().join("mz.csv");
    std::fs::write(
        &xm,
        "from_code,to_code,weight,target_share,basis\nA,M1,0.9995,1,area\nA,M2,0.0005,1,area\n",
    )
    .unwrap();
    std::fs::write(
        &mz,
        "from_code,to_code,weight,target_share,basis\nM1,P,1,1,area\nM2,Q,1,0.00049975012,area\n",
    )
    .unwrap();
    let out = dir.path().join("xz.csv");
    regionkey()
        .arg("chain")
        .arg(&xm)
        .arg(&mz)
        .arg("-o")
        .arg(&out)
        .assert()
        .success()
        .stderr(predicate::str::contains("1 pieces of 1 sources dropped"));
    let text = std::fs::read_to_string(&out).unwrap();
    assert_eq!(
        text,
        "from_code,to_code,weight,target_share,basis\nA,P,1.000000000000,1.000000000000,area\n"
    );
    let meta: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("xz.csv.json")).unwrap())
            .unwrap();
    assert_eq!(meta["pieces_dropped"], 1);
    assert_eq!(meta["options"]["min_share"], 0.001);
    // --min-share 0 keeps the sliver.
    regionkey()
        .arg("chain")
        .arg(&xm)
        .arg(&mz)
        .args(["--min-share", "0", "-q", "-o"])
        .arg(&out)
        .assert()
        .success();
    assert!(std::fs::read_to_string(&out)
        .unwrap()
        .contains("A,Q,0.000500000000,"));
}
