//! A batch that is interrupted and resumed, or run on any number of threads, gives the
//! same tables as one uninterrupted run. Specification: issue 6 (determinism and
//! resumability); comparisons are byte for byte, since the tables hold no clock values.

mod common;

use std::path::Path;

use common::*;
use serde_json::{json, Value};

#[test]
fn thread_count_does_not_change_the_tables() {
    let root = scratch("batch_threads");
    let study = write_study(&root, &quick_study("threads"));
    let one = batch(&study, &root.join("one"), &["--jobs", "1"]);
    let two = batch(&study, &root.join("two"), &["--jobs", "2"]);
    assert_eq!(code(&one, &[0, 1]), code(&two, &[0, 1]));
    let a = tables(&root.join("one/threads"));
    assert_eq!(a, tables(&root.join("two/threads")));
    // Every case ran and is in the table, in id order.
    let r = results(&root.join("one/threads"));
    let ids: Vec<&str> = r["cases"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["id"].as_str().unwrap())
        .collect();
    let expected: Vec<String> = (1..=12).map(|k| format!("c{k:04}")).collect();
    assert_eq!(ids, expected);
    assert!(!a[0].contains("time_s"), "no run time in results.csv");
}

#[test]
fn a_shard_then_a_resumed_whole_equals_an_uninterrupted_run() {
    let root = scratch("batch_resume");
    let study = write_study(&root, &quick_study("resume"));
    let full = batch(&study, &root.join("full"), &["--jobs", "2"]);
    let full_code = code(&full, &[0, 1]);
    let expected = tables(&root.join("full/resume"));

    // "Interrupted" after the first of three shards.
    let part = root.join("part");
    code(
        &batch(&study, &part, &["--jobs", "1", "--shard", "1/3"]),
        &[0, 1],
    );
    let cases = part.join("resume/cases");
    let first_shard: Vec<(String, Vec<u8>)> = ["c0001", "c0004", "c0007", "c0010"]
        .iter()
        .map(|id| {
            let p = cases.join(format!("{id}.json"));
            (id.to_string(), std::fs::read(&p).unwrap())
        })
        .collect();
    assert_eq!(std::fs::read_dir(&cases).unwrap().count(), 4);

    let resumed = batch(&study, &part, &["--jobs", "2", "--resume"]);
    assert_eq!(code(&resumed, &[0, 1]), full_code);
    assert_eq!(tables(&part.join("resume")), expected);
    // The finished cases were reused, not rerun: their files (run time included) are
    // untouched.
    for (id, bytes) in &first_shard {
        assert_eq!(
            &std::fs::read(cases.join(format!("{id}.json"))).unwrap(),
            bytes,
            "{id}"
        );
    }

    // A kill mid-run leaves some cases without a file, perhaps a stray temporary file,
    // and never a partial result file; a damaged file is rerun like a missing one.
    for id in ["c0002", "c0005", "c0011"] {
        std::fs::remove_file(cases.join(format!("{id}.json"))).unwrap();
    }
    std::fs::write(cases.join(".c0002.json.99999.tmp"), "{\"id\": \"c00").unwrap();
    std::fs::write(cases.join("c0008.json"), "{\"id\": \"c00").unwrap();
    let again = batch(&study, &part, &["--jobs", "2", "--resume"]);
    assert_eq!(code(&again, &[0, 1]), full_code);
    assert_eq!(tables(&part.join("resume")), expected);
}

#[test]
fn resume_reruns_cases_whose_scenario_changed() {
    let root = scratch("batch_resume_changed");
    let mut s = quick_study("changed");
    let study = write_study(&root, &s);
    let out = root.join("out");
    code(&batch(&study, &out, &["--jobs", "2"]), &[0, 1]);
    // A tighter ripple limit changes every case's scenario, so nothing may be reused.
    s["limits"]["ripple_pp"] = serde_json::json!("1 mV");
    let study = write_study(&root, &s);
    let again = batch(&study, &out, &["--jobs", "2", "--resume"]);
    assert_eq!(
        code(&again, &[1]),
        1,
        "every case now fails the ripple limit"
    );
    let r = results(&out.join("changed"));
    assert_eq!(r["counts"]["failed"], 12);
    let stderr = String::from_utf8_lossy(&again.stderr);
    assert!(!stderr.contains("reused"), "{stderr}");
}

#[test]
fn resume_removes_temporary_files_a_crashed_run_left() {
    let root = scratch("batch_stale_tmp");
    let study = write_study(&root, &quick_study("stale"));
    let cases = root.join("out/stale/cases");
    std::fs::create_dir_all(&cases).unwrap();
    // A case file half-written by a process that no longer exists: 4294967295 is above
    // any Linux pid (pid_max is at most 2^22).
    let stale = cases.join(".c0001.json.4294967295.tmp");
    std::fs::write(&stale, "{ \"id\": \"c00").unwrap();
    let out = batch(&study, &root.join("out"), &["--jobs", "2", "--resume"]);
    code(&out, &[0, 1]);
    assert!(!stale.exists(), "the stale temporary file was removed");
    let left: Vec<_> = std::fs::read_dir(&cases)
        .unwrap()
        .flatten()
        .filter(|e| e.file_name().to_string_lossy().ends_with(".tmp"))
        .collect();
    assert!(left.is_empty(), "{left:?}");
    assert!(
        String::from_utf8_lossy(&out.stderr).contains("removed 1 temporary file(s)"),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn sigint_keeps_finished_cases_and_resume_does_the_rest() {
    let root = scratch("batch_sigint");
    // Four cases of 0.3 s simulated (45,000 periods each), one at a time: the first
    // is done and the second under way when the signal comes.
    let study = write_study(
        &root,
        &json!({
            "name": "sigint",
            "base": base_scenario(),
            "parameters": { "vin": "converter.input.voltage", "stop": "analysis.stop_time" },
            "corners": { "vin": ["18 V", "24 V", "30 V", "36 V"], "stop": ["0.3 s"] },
            "limits": { "startup_t90": null }
        }),
    );
    let out = root.join("out");
    let child = stepflux()
        .arg("batch")
        .arg(&study)
        .arg("--out")
        .arg(&out)
        .args(["--waveforms", "none", "--jobs", "1", "--quiet"])
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let cases = out.join("sigint/cases");
    let first = cases.join("c0001.json");
    let start = std::time::Instant::now();
    while !first.exists() && start.elapsed() < std::time::Duration::from_secs(300) {
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    std::thread::sleep(std::time::Duration::from_millis(200));
    let sent = std::process::Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(sent.success());
    let stopped = child.wait_with_output().unwrap();
    let stderr = String::from_utf8_lossy(&stopped.stderr);
    assert_eq!(stopped.status.code(), Some(4), "{stderr}");
    assert!(stderr.contains("with --resume to do the rest"), "{stderr}");
    let files = |dir: &Path| -> Vec<String> {
        std::fs::read_dir(dir)
            .unwrap()
            .flatten()
            .map(|e| e.file_name().to_string_lossy().into_owned())
            .collect()
    };
    let kept = files(&cases);
    assert!(
        !kept.is_empty() && kept.len() < 4,
        "some cases kept, some left: {kept:?}"
    );
    assert!(kept.iter().all(|f| !f.ends_with(".tmp")), "{kept:?}");
    // Every kept file is a whole record of a finished case.
    for f in &kept {
        let text = std::fs::read_to_string(cases.join(f)).unwrap();
        let v: Value = serde_json::from_str(&text).unwrap();
        assert!(v["status"].is_string(), "{f}: {text}");
    }
    let resumed = batch(&study, &out, &["--jobs", "2", "--resume"]);
    code(&resumed, &[0, 1]);
    assert_eq!(files(&cases).len(), 4);
}
