//! The Monte Carlo sampler draws what the study asks for: 2000 samples listed with
//! `stepflux batch --list` (no simulation), checked against the requested distribution
//! with bounds of four standard errors (a false alarm about once in 16 000 per check
//! for a correct sampler; the draws are seeded, so the outcome is fixed).

mod common;

use common::*;
use serde_json::json;

const N: usize = 2000;
const COUT: f64 = 220e-6;
const LM: f64 = 200e-6;

/// (cout, lm) of every listed case.
fn draws(tag: &str, extra: &[&str]) -> Vec<(String, f64, f64)> {
    // One folder per test: the tests run in parallel.
    let root = scratch(&format!("batch_mc_{tag}"));
    let study = json!({
        "name": "mc",
        "base": base_scenario(),
        "parameters": {
            "cout": "converter.output_capacitor.capacitance",
            "lm": "converter.transformer.magnetising_inductance"
        },
        "monte_carlo": {
            "samples": N,
            "seed": 20240601,
            "tolerances": {
                "cout": { "uniform_percent": 20 },
                "lm": { "normal_percent": 10 }
            }
        }
    });
    let path = write_study(&root, &study);
    let out = batch(&path, &root.join("out"), &[&["--list"], extra].concat());
    code(&out, &[0]);
    let text = String::from_utf8(out.stdout).unwrap();
    let mut lines = text.lines();
    assert_eq!(lines.next(), Some("id,cout,lm"));
    lines
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (
                f[0].to_string(),
                f[1].parse().unwrap(),
                f[2].parse().unwrap(),
            )
        })
        .collect()
}

fn mean_var(x: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let m = x.iter().sum::<f64>() / n;
    (
        m,
        x.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (n - 1.0),
    )
}

#[test]
fn uniform_tolerance_has_the_uniform_mean_spread_and_range() {
    let d = draws("uniform", &[]);
    assert_eq!(d.len(), N);
    let x: Vec<f64> = d.iter().map(|r| r.1).collect();
    // Uniform on [a, b] = nominal ± 20 %: mean (a+b)/2, variance (b−a)²/12, fourth
    // central moment (9/5)σ⁴. Source: Papoulis & Pillai, "Probability, Random Variables
    // and Stochastic Processes", 4th ed., uniform distribution (from memory).
    let (a, b) = (0.8 * COUT, 1.2 * COUT);
    let var = (b - a).powi(2) / 12.0;
    let (m, s2) = mean_var(&x);
    // Standard error of the mean σ/√N.
    assert!(
        (m - COUT).abs() < 4.0 * var.sqrt() / (N as f64).sqrt(),
        "mean {m}"
    );
    // Var(s²) ≈ (μ4 − σ⁴)/N = 0.8 σ⁴/N for the uniform distribution (large-N form;
    // same reference, sampling distribution of the variance).
    assert!(
        (s2 - var).abs() < 4.0 * var * (0.8 / N as f64).sqrt(),
        "variance {s2} vs {var}"
    );
    // Hard bounds, with room for the last-digit rounding of the scaled value.
    assert!(x
        .iter()
        .all(|&v| v >= a * (1.0 - 1e-12) && v <= b * (1.0 + 1e-12)));
}

#[test]
fn normal_tolerance_has_the_normal_mean_spread_and_shape() {
    let d = draws("normal", &[]);
    let x: Vec<f64> = d.iter().map(|r| r.2).collect();
    let sigma = 0.1 * LM;
    let n = N as f64;
    let (m, s2) = mean_var(&x);
    assert!((m - LM).abs() < 4.0 * sigma / n.sqrt(), "mean {m}");
    // (N−1)s²/σ² follows χ² with N−1 degrees of freedom for normal samples (Cochran's
    // theorem; Hogg, McKean & Craig, "Introduction to Mathematical Statistics", sampling
    // from the normal distribution, from memory); at 1999 degrees of freedom χ² is
    // close to normal with mean N−1 and variance 2(N−1).
    let q = (n - 1.0) * s2 / sigma.powi(2);
    assert!(
        (q - (n - 1.0)).abs() < 4.0 * (2.0 * (n - 1.0)).sqrt(),
        "chi2 {q}"
    );
    // Shape: P(|X − μ| < σ) = erf(1/√2) = 0.682689 (standard normal table), binomial
    // standard error √(p(1−p)/N). A uniform of the same σ would give 0.577.
    let p = 0.682_689;
    let f = x.iter().filter(|&&v| (v - LM).abs() < sigma).count() as f64 / n;
    assert!(
        (f - p).abs() < 4.0 * (p * (1.0 - p) / n).sqrt(),
        "within 1σ: {f}"
    );
}

#[test]
fn parameters_are_drawn_independently_and_shards_see_the_same_draws() {
    let d = draws("whole", &[]);
    // Sample correlation of independent draws: standard error ≈ 1/√N (Fisher, large
    // N; any statistics text).
    let (mx, vx) = mean_var(&d.iter().map(|r| r.1).collect::<Vec<_>>());
    let (my, vy) = mean_var(&d.iter().map(|r| r.2).collect::<Vec<_>>());
    let cov = d.iter().map(|r| (r.1 - mx) * (r.2 - my)).sum::<f64>() / (N as f64 - 1.0);
    let r = cov / (vx * vy).sqrt();
    assert!(r.abs() < 4.0 / (N as f64).sqrt(), "correlation {r}");
    // A shard lists exactly the whole study's rows with index mod 7 = 2: draws depend on
    // the seed and the sample, never on the slice.
    let shard = draws("shard", &["--shard", "3/7"]);
    let expected: Vec<_> = d
        .iter()
        .enumerate()
        .filter(|(k, _)| k % 7 == 2)
        .map(|(_, r)| r.clone())
        .collect();
    assert_eq!(shard, expected);
}
