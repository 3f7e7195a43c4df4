//! The study report's Monte Carlo pictures: a histogram of each limited figure across
//! the cases with its limit marked (inline SVG), and the estimated pass rate with its
//! Wilson score interval (Wilson 1927, "Probable inference, the law of succession,
//! and statistical inference", JASA 22:209–212), which stays inside [0, 1] and is
//! sensible at 0 or n passes, where the normal-approximation interval is not.

use std::fmt::Write as _;

use crate::eng::eng;
use crate::writers::html::escape;

/// Two-sided 95 % standard normal quantile.
pub const Z95: f64 = 1.959_963_984_540_054;

/// Wilson score interval for `passed` successes of `n` trials at quantile `z`:
/// centre (p̂ + z²/2n)/(1 + z²/n), half width z/(1 + z²/n)·√(p̂(1−p̂)/n + z²/4n²).
/// `None` when there are no trials.
pub fn wilson(passed: usize, n: usize, z: f64) -> Option<(f64, f64)> {
    if n == 0 {
        return None;
    }
    let (k, n) = (passed as f64, n as f64);
    let p = k / n;
    let z2 = z * z;
    let d = 1.0 + z2 / n;
    let centre = (p + z2 / (2.0 * n)) / d;
    let half = z / d * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt();
    Some(((centre - half).max(0.0), (centre + half).min(1.0)))
}

/// Bins across the values' range (Sturges' rule, ⌈log2 n⌉ + 1, at least 5).
fn bins(n: usize) -> usize {
    ((n as f64).log2().ceil() as usize + 1).max(5)
}

/// An inline SVG histogram of `values` (unit `unit`) with a dashed line at `limit`.
pub fn svg(title: &str, values: &[f64], unit: &str, limit: f64) -> String {
    let finite: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
    let lo = finite.iter().copied().fold(limit, f64::min);
    let hi = finite.iter().copied().fold(limit, f64::max);
    let span = if hi > lo { hi - lo } else { lo.abs().max(1.0) };
    let (lo, hi) = (lo - 0.05 * span, hi + 0.05 * span);
    let k = bins(finite.len());
    let mut counts = vec![0usize; k];
    for v in &finite {
        let i = (((v - lo) / (hi - lo)) * k as f64).floor() as usize;
        counts[i.min(k - 1)] += 1;
    }
    let top = counts.iter().copied().max().unwrap_or(1).max(1) as f64;
    let (w, h, left, bottom) = (480.0, 200.0, 40.0, 170.0);
    let x = |v: f64| left + (v - lo) / (hi - lo) * (w - left - 10.0);
    let mut s = format!(
        "<svg width=\"{w}\" height=\"{h}\" \
         viewBox=\"0 0 {w} {h}\" role=\"img\"><title>{}</title>",
        escape(title)
    );
    for (i, c) in counts.iter().enumerate() {
        let x0 = x(lo + (hi - lo) * i as f64 / k as f64);
        let x1 = x(lo + (hi - lo) * (i + 1) as f64 / k as f64);
        let bar = (bottom - 20.0) * *c as f64 / top;
        let _ = write!(
            s,
            "<rect x=\"{x0:.1}\" y=\"{:.1}\" width=\"{:.1}\" height=\"{bar:.1}\" fill=\"#7fa7b8\"/>",
            bottom - bar,
            (x1 - x0 - 1.0).max(0.5)
        );
    }
    let lx = x(limit);
    // The label reads away from the nearer edge so it is never cut off.
    let anchor = if lx > w / 2.0 { "end" } else { "start" };
    let _ = write!(
        s,
        "<line x1=\"{left}\" y1=\"{bottom}\" x2=\"{}\" y2=\"{bottom}\" stroke=\"#555\"/>\
         <line x1=\"{lx:.1}\" y1=\"15\" x2=\"{lx:.1}\" y2=\"{bottom}\" stroke=\"#b0402a\" \
         stroke-dasharray=\"5,3\"/><text x=\"{lx:.1}\" y=\"12\" font-size=\"11\" \
         text-anchor=\"{anchor}\" fill=\"#b0402a\">limit {}</text>\
         <text x=\"{left}\" y=\"188\" font-size=\"11\">{}</text>\
         <text x=\"{}\" y=\"188\" font-size=\"11\" text-anchor=\"end\">{}</text>\
         <text x=\"4\" y=\"30\" font-size=\"11\">{}</text></svg>",
        w - 10.0,
        escape(&eng(limit, unit)),
        escape(&eng(lo, unit)),
        w - 10.0,
        escape(&eng(hi, unit)),
        top
    );
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Hand computation, z = 1.96, 18 passes of 20 (p̂ = 0.9, z² = 3.8416):
    ///   1 + z²/n = 1 + 0.19208 = 1.19208
    ///   centre = (0.9 + 3.8416/40) / 1.19208 = 0.99604 / 1.19208 = 0.835548
    ///   half   = 1.96 / 1.19208 · √(0.09/20 + 3.8416/1600)
    ///          = 1.644185 · √(0.0045 + 0.002401) = 1.644185 · 0.0830723 = 0.136586
    ///   interval = (0.698962, 0.972134)
    /// Tolerance 1e-5: the hand figures carry six digits.
    #[test]
    fn wilson_interval_matches_the_hand_computation() {
        let (lo, hi) = wilson(18, 20, 1.96).expect("trials");
        assert!((lo - 0.698962).abs() < 1e-5, "{lo}");
        assert!((hi - 0.972134).abs() < 1e-5, "{hi}");
    }

    /// All 10 pass: p̂ = 1, the half width is z/(1+z²/n)·z/(2n), so the interval is
    /// (1/(1 + z²/n), 1) = (1/1.38416, 1) = (0.722460, 1): not the degenerate (1, 1)
    /// of the normal approximation (Wilson 1927).
    #[test]
    fn wilson_interval_is_not_degenerate_when_every_case_passes() {
        let (lo, hi) = wilson(10, 10, 1.96).expect("trials");
        assert!((lo - 0.722460).abs() < 1e-5, "{lo}");
        assert!((hi - 1.0).abs() < 1e-12, "{hi}");
        assert_eq!(wilson(0, 0, Z95), None);
    }

    #[test]
    fn histogram_counts_every_value_and_marks_the_limit() {
        let page = svg("ripple", &[1.0, 2.0, 2.5, 3.0, 10.0], "V", 5.0);
        assert_eq!(page.matches("<rect").count(), bins(5));
        assert!(page.contains("limit 5.00 V"), "{page}");
    }
}
