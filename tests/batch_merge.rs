//! Shards of a study, merged, give the tables of the unsharded run; a missing shard is
//! reported. Specification: issue 6 (`--shard I/N`, `stepflux merge`).

mod common;

use common::*;

#[test]
fn merged_shards_equal_the_unsharded_run() {
    let root = scratch("batch_merge");
    let study = write_study(&root, &quick_study("merge"));
    let whole = batch(&study, &root.join("whole"), &["--jobs", "2"]);
    let whole_code = code(&whole, &[0, 1]);
    for i in 1..=3 {
        let shard = format!("{i}/3");
        let out = root.join(format!("shard{i}"));
        code(
            &batch(&study, &out, &["--jobs", "1", "--shard", &shard]),
            &[0, 1],
        );
        // Round robin: shard i holds the cases whose 0-based index k has k mod 3 = i-1.
        let r = results(&out.join("merge"));
        for case in r["cases"].as_array().unwrap() {
            let k: usize = case["id"].as_str().unwrap()[1..].parse::<usize>().unwrap() - 1;
            assert_eq!(k % 3, i - 1);
        }
        assert_eq!(r["cases"].as_array().unwrap().len(), 4);
    }
    let merged = stepflux()
        .arg("merge")
        .args(["shard3", "shard1", "shard2/merge"].map(|d| root.join(d)))
        .arg("--out")
        .arg(root.join("merged"))
        .output()
        .unwrap();
    assert_eq!(code(&merged, &[0, 1]), whole_code);
    assert_eq!(
        tables(&root.join("merged/merge")),
        tables(&root.join("whole/merge"))
    );

    // Without shard 2 the merge is incomplete: exit 3 (README "Exit codes": not all
    // results are there) and the missing ids listed.
    let partial = stepflux()
        .arg("merge")
        .args(["shard1", "shard3"].map(|d| root.join(d)))
        .arg("--out")
        .arg(root.join("partial"))
        .output()
        .unwrap();
    assert_eq!(code(&partial, &[3]), 3);
    let r = results(&root.join("partial/merge"));
    assert_eq!(
        r["missing"],
        serde_json::json!(["c0002", "c0005", "c0008", "c0011"])
    );
}

#[test]
fn merge_refuses_shards_of_different_studies() {
    let root = scratch("batch_merge_mixed");
    let a = root.join("a");
    let b = root.join("b");
    std::fs::create_dir_all(&a).unwrap();
    std::fs::create_dir_all(&b).unwrap();
    let mut other = quick_study("mixed");
    other["monte_carlo"]["seed"] = serde_json::json!(12);
    let sa = write_study(&a, &quick_study("mixed"));
    let sb = write_study(&b, &other);
    code(&batch(&sa, &a, &["--list"]), &[0]);
    code(
        &batch(&sa, &a.join("out"), &["--shard", "1/6", "--jobs", "1"]),
        &[0, 1],
    );
    code(
        &batch(&sb, &b.join("out"), &["--shard", "2/6", "--jobs", "1"]),
        &[0, 1],
    );
    let merged = stepflux()
        .arg("merge")
        .args([a.join("out"), b.join("out")])
        .arg("--out")
        .arg(root.join("merged"))
        .output()
        .unwrap();
    // A different seed is a different plan: bad input, exit 2.
    assert_eq!(code(&merged, &[2]), 2);
    assert!(String::from_utf8_lossy(&merged.stderr).contains("different study or plan"));
}
