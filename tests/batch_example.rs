//! The example study in scenarios/ is valid and expands as documented: corners crossed
//! in parameter-name order (last fastest), each with the same Monte Carlo units.

mod common;

use common::*;

#[test]
fn example_study_expands_line_load_corners_times_units() {
    let study = concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/study_corners.json");
    let out = stepflux()
        .args(["batch", study, "--list"])
        .output()
        .unwrap();
    code(&out, &[0]);
    let text = String::from_utf8(out.stdout).unwrap();
    let rows: Vec<Vec<&str>> = text.lines().map(|l| l.split(',').collect()).collect();
    assert_eq!(rows[0], ["id", "cout", "lm", "lout", "rload", "vin"]);
    let rows = &rows[1..];
    // 2 loads × 3 lines × 8 units.
    assert_eq!(rows.len(), 48);
    let corner = |r: &Vec<&str>| (r[4].parse::<f64>().unwrap(), r[5].parse::<f64>().unwrap());
    let corners: Vec<(f64, f64)> = rows.chunks(8).map(|c| corner(&c[0])).collect();
    assert!(rows
        .chunks(8)
        .all(|c| c.iter().all(|r| corner(r) == corner(&c[0]))));
    assert_eq!(
        corners,
        [
            (1.25, 18.0),
            (1.25, 24.0),
            (1.25, 32.0),
            (2.5, 18.0),
            (2.5, 24.0),
            (2.5, 32.0)
        ]
    );
    // Unit k has the same component values at every corner.
    for k in 0..8 {
        let unit: Vec<&[&str]> = rows.iter().skip(k).step_by(8).map(|r| &r[1..4]).collect();
        assert!(unit.iter().all(|u| u == &unit[0]), "unit {k}");
    }
}
