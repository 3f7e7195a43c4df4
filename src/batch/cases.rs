//! Case expansion: the study's grid (corners × sweeps) crossed with its Monte Carlo
//! samples, in a fixed order, each case a complete scenario.
//!
//! Order: the first axis (corners in name order, then sweeps in file order) varies
//! slowest and the Monte Carlo sample fastest, so case index
//! `k = grid_point · samples + sample`. Ids are `c` and the 1-based index, zero-padded
//! to at least four digits (`c0001`).
//!
//! Sample `s` draws from a ChaCha8 generator seeded with the study seed on stream `s`:
//! its values depend only on (seed, sample), never on threads, shards or which cases
//! ran before, and sample `s` is the same set of deviations at every grid point.

use anyhow::{Context, Result};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;
use serde_json::Value;

use super::study::{Sampling, Study, Tolerance};

/// One case of a study.
#[derive(Clone, Debug, PartialEq)]
pub struct Case {
    /// 0-based position in the study.
    pub index: usize,
    /// `c0001`, …
    pub id: String,
    /// Value of each parameter (study order), SI units.
    pub values: Vec<f64>,
}

/// Digits in case ids for a study of `total` cases.
pub fn id_width(total: usize) -> usize {
    total.to_string().len().max(4)
}

/// Id of case `index`.
pub fn case_id(index: usize, width: usize) -> String {
    format!("c{:0width$}", index + 1)
}

/// Every case of the study, in order.
pub fn plan(study: &Study) -> Result<Vec<Case>> {
    let total = study.case_count()?;
    let samples = study.sampling.as_ref().map_or(1, |s| s.samples);
    let factors: Vec<Vec<f64>> = match &study.sampling {
        Some(s) => (0..samples).map(|k| sample_factors(s, k)).collect(),
        None => vec![Vec::new()],
    };
    let width = id_width(total);
    Ok((0..total)
        .map(|index| Case {
            index,
            id: case_id(index, width),
            values: values_at(study, index / samples, &factors[index % samples]),
        })
        .collect())
}

/// Parameter values at grid point `point` with the sample's tolerance factors.
fn values_at(study: &Study, mut point: usize, factors: &[f64]) -> Vec<f64> {
    let mut values: Vec<f64> = study.nominal.iter().map(|n| n.unwrap_or(0.0)).collect();
    // Mixed radix, last axis fastest.
    for axis in study.axes.iter().rev() {
        let at = point % axis.len;
        point /= axis.len;
        for (p, list) in &axis.values {
            values[*p] = list[at];
        }
    }
    if let Some(s) = &study.sampling {
        for ((p, _), f) in s.tolerances.iter().zip(factors) {
            values[*p] *= f;
        }
    }
    values
}

/// The multiplying factors `1 + deviation` of Monte Carlo sample `sample`, one per
/// tolerance in the sampling's (parameter-name) order.
pub fn sample_factors(sampling: &Sampling, sample: usize) -> Vec<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(sampling.seed);
    rng.set_stream(sample as u64);
    sampling
        .tolerances
        .iter()
        .map(|(_, tol)| match *tol {
            Tolerance::UniformPercent(p) => 1.0 + p / 100.0 * rng.random_range(-1.0..=1.0),
            Tolerance::NormalPercent(p) => {
                let z: f64 = rng.sample(StandardNormal);
                1.0 + p / 100.0 * z
            }
        })
        .collect()
}

/// The case's scenario as JSON text: the base with the case name and its values.
pub fn scenario_text(study: &Study, case: &Case) -> Result<String> {
    let mut doc = study.base.clone();
    let name = Value::String(format!("{}-{}", study.name, case.id));
    if let Some(obj) = doc.as_object_mut() {
        obj.insert("name".into(), name);
    }
    for (p, &x) in study.parameters.iter().zip(&case.values) {
        let number = serde_json::Number::from_f64(x)
            .with_context(|| format!("'{}' = {x} is not a finite number", p.name))?;
        p.path
            .set(&mut doc, Value::Number(number))
            .with_context(|| format!("setting '{}' at {}", p.name, p.path_text))?;
    }
    serde_json::to_string_pretty(&doc).context("formatting the case scenario")
}

/// 64-bit FNV-1a: a stable fingerprint (std's hasher may change between releases, and
/// result files outlive the binary that wrote them).
pub fn fingerprint(bytes: &[u8]) -> String {
    let hash = bytes.iter().fold(0xcbf2_9ce4_8422_2325_u64, |h, &b| {
        (h ^ u64::from(b)).wrapping_mul(0x0000_0100_0000_01b3)
    });
    format!("{hash:016x}")
}

/// Fingerprint of the whole plan: base scenario, paths and every case's values. Shards
/// of one study share it; merge refuses folders that do not.
pub fn plan_fingerprint(study: &Study, cases: &[Case]) -> String {
    let mut text = study.base.to_string();
    for p in &study.parameters {
        text.push_str(&p.path_text);
        text.push('\n');
    }
    let mut bytes = text.into_bytes();
    for case in cases {
        for x in &case.values {
            bytes.extend_from_slice(&x.to_bits().to_le_bytes());
        }
    }
    fingerprint(&bytes)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ids_are_padded_and_one_based() {
        assert_eq!(case_id(0, id_width(64)), "c0001");
        assert_eq!(case_id(12344, id_width(20000)), "c12345");
        assert_eq!(id_width(100_000), 6);
    }

    #[test]
    fn fingerprint_is_fnv1a() {
        // Source: Fowler, Noll, Vo, "FNV hash" reference test vectors: FNV-1a 64 of ""
        // is cbf29ce484222325 (the offset basis) and of "a" is af63dc4c8601ec8c.
        assert_eq!(fingerprint(b""), "cbf29ce484222325");
        assert_eq!(fingerprint(b"a"), "af63dc4c8601ec8c");
    }

    #[test]
    fn a_sample_does_not_depend_on_the_others() {
        let s = Sampling {
            samples: 10,
            seed: 42,
            tolerances: vec![(0, Tolerance::UniformPercent(10.0))],
        };
        let forward: Vec<_> = (0..10).map(|k| sample_factors(&s, k)).collect();
        let backward: Vec<_> = (0..10).rev().map(|k| sample_factors(&s, k)).collect();
        assert!(forward.iter().eq(backward.iter().rev()));
        assert_ne!(forward[0], forward[1]);
    }
}
