//! A stable-toolchain stand-in for the fuzz targets in `fuzz/`: mutated example files
//! through scenario and study loading. Property: loading returns a value or an error —
//! never a panic — and an error message is not empty. Ignored in the normal run (it
//! takes minutes); run with
//! `cargo test --release --test load_mutations -- --ignored --nocapture`, and
//! `STEPFLUX_MUTATIONS=N` for another count (default 100,000 per format).

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};

use rand::{Rng, RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde_json::{json, Value};
use stepflux::scenario::{document, load_str};

const SCENARIOS: [&str; 4] = [
    include_str!("../scenarios/demo-startup.json"),
    include_str!("../scenarios/demo-load-step.json"),
    include_str!("../scenarios/rcd-clamp.json"),
    include_str!("../scenarios/active-clamp.json"),
];
const STUDY: &str = include_str!("../scenarios/study_corners.json");

/// Texts that tend to break readers: empty and mixed containers, extreme numbers,
/// a byte-order mark, a byte that is not UTF-8, long runs.
const TOKENS: [&[u8]; 14] = [
    b"{}",
    b"[]",
    b"null",
    b"1e308",
    b"5e-324",
    b"-0",
    b"\"\"",
    b"\"1e-30 Hz\"",
    b"\xef\xbb\xbf",
    b"\xff",
    b"{\"a\":{},\"b\":[]}",
    b"99999999999999999999999",
    b"\"4k7k\"",
    b",",
];

fn count() -> usize {
    std::env::var("STEPFLUX_MUTATIONS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(100_000)
}

/// One byte-level edit of `bytes`.
fn mutate_bytes(rng: &mut impl Rng, bytes: &mut Vec<u8>) {
    let n = bytes.len().max(1);
    let at = rng.random_range(0..n).min(bytes.len());
    match rng.random_range(0..5) {
        0 if !bytes.is_empty() => {
            let i = at.min(bytes.len() - 1);
            bytes[i] ^= 1 << rng.random_range(0..8);
        }
        1 => {
            let end = (at + rng.random_range(1..64)).min(bytes.len());
            bytes.drain(at..end);
        }
        2 => {
            let token = TOKENS[rng.random_range(0..TOKENS.len())];
            bytes.splice(at..at, token.iter().copied());
        }
        3 => {
            let end = (at + rng.random_range(1..200)).min(bytes.len());
            let chunk: Vec<u8> = bytes[at..end].to_vec();
            bytes.splice(at..at, chunk);
        }
        _ => bytes.insert(at, rng.random()),
    }
}

/// Replaces one value somewhere in `v` by a surprising one.
fn mutate_value(rng: &mut impl Rng, v: &mut Value) {
    let replacement = match rng.random_range(0..8) {
        0 => json!({}),
        1 => json!([]),
        2 => Value::Null,
        3 => json!(rng.random::<f64>() * 10f64.powi(rng.random_range(-320..308))),
        4 => json!("x".repeat(rng.random_range(0..300))),
        5 => json!({ "a": 1, "b": 2 }),
        6 => json!(-1),
        _ => json!("0 Hz"),
    };
    // A random walk down the tree, written as a JSON pointer.
    let mut pointer = String::new();
    let mut node: &Value = v;
    loop {
        let step = match node {
            Value::Object(m) if !m.is_empty() && rng.random_bool(0.7) => {
                let k = rng.random_range(0..m.len());
                m.iter()
                    .nth(k)
                    .map(|(key, child)| (key.replace('~', "~0").replace('/', "~1"), child))
            }
            Value::Array(a) if !a.is_empty() && rng.random_bool(0.7) => {
                let k = rng.random_range(0..a.len());
                Some((k.to_string(), &a[k]))
            }
            _ => None,
        };
        match step {
            Some((segment, child)) => {
                pointer.push('/');
                pointer.push_str(&segment);
                node = child;
            }
            None => break,
        }
    }
    if let Some(target) = v.pointer_mut(&pointer) {
        *target = replacement;
    }
}

/// A mutated copy of `text`: a few value or byte edits.
fn mutant(rng: &mut impl Rng, text: &str) -> Vec<u8> {
    let mut v: Value = serde_json::from_str(text).expect("example parses");
    for _ in 0..rng.random_range(0..3) {
        mutate_value(rng, &mut v);
    }
    let mut bytes = serde_json::to_vec_pretty(&v).expect("serialise");
    for _ in 0..rng.random_range(0..3) {
        mutate_bytes(rng, &mut bytes);
    }
    bytes
}

/// Runs `load` on `n` mutants of `texts`; returns (accepted, refused), failing on a
/// panic or an empty message, with the input saved for replay.
fn drive(
    name: &str,
    texts: &[&str],
    n: usize,
    load: &dyn Fn(&str) -> Result<(), String>,
) -> (usize, usize) {
    let mut rng = ChaCha8Rng::seed_from_u64(12);
    let (mut ok, mut refused) = (0, 0);
    for k in 0..n {
        let bytes = mutant(&mut rng, texts[k % texts.len()]);
        let run = catch_unwind(AssertUnwindSafe(|| {
            match document::decode(bytes.clone(), "mutant.json") {
                Ok(text) => load(&text),
                Err(e) => Err(e.to_string()),
            }
        }));
        match run {
            Ok(Ok(())) => ok += 1,
            Ok(Err(message)) if !message.trim().is_empty() => refused += 1,
            outcome => {
                let path = save(name, k, &bytes);
                panic!("{name} mutant {k} ({}): {outcome:?}", path.display());
            }
        }
    }
    (ok, refused)
}

fn save(name: &str, k: usize, bytes: &[u8]) -> PathBuf {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("load_mutations");
    let _ = std::fs::create_dir_all(&dir);
    let path = dir.join(format!("{name}-{k}.json"));
    let _ = std::fs::write(&path, bytes);
    path
}

#[test]
#[ignore = "minutes of mutation; run on demand (see the module docs)"]
fn mutated_scenarios_and_studies_load_or_are_refused() {
    let n = count();
    let scenario = |t: &str| {
        load_str(t, "mutant.json")
            .map(|_| ())
            .map_err(|e| e.to_string())
    };
    let (ok, refused) = drive("scenario", &SCENARIOS, n, &scenario);
    eprintln!("scenarios: {n} mutants, {ok} loaded, {refused} refused");
    let dir = Path::new(concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios"));
    let study = |t: &str| {
        stepflux::batch::plan_text(t, dir, "mutant-study.json")
            .map(|_| ())
            .map_err(|e| format!("{e:#}"))
    };
    let (ok, refused) = drive("study", &[STUDY], n, &study);
    eprintln!("studies: {n} mutants, {ok} loaded, {refused} refused");
}
