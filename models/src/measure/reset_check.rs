//! The core-reset check: every cycle against the design's ratings, reduced to one
//! verdict with the cycle that failed first and the worst one.
//!
//! Per cycle (turn-on to next turn-on) it reads the cycle record — reset end, whether
//! the reset was still running at the next turn-on, magnetising current at turn-on,
//! peak flux density, peak drain voltage — and, from the samples, the peak reverse
//! voltage of the rectifier (`rect.v`), freewheel (`fw.v`) and reset-path diode
//! (`reset.v`), and the high-side switch voltage (`sw.hi.v`) where the template has
//! them. Each criterion becomes a margin normalised so that ≥ 0 passes:
//!
//! - reset complete: −1 when a reset diode still conducted at the next turn-on;
//! - reset margin: (next turn-on − reset end)/period − required margin;
//! - magnetising current at turn-on: (limit − i)/limit (a positive residual is flux
//!   left in the core; a negative one, as an active clamp makes, is not a failure);
//! - flux density: (Bsat − B_peak)/Bsat − required margin;
//! - each voltage: (derated rating − peak)/derated rating.
//!
//! The worst cycle is the one with the lowest margin of any criterion.
//!
//! The last cycle of a run is closed by the run's end, not by a turn-on. When the run
//! ends before that cycle's period does (told by [`ResetCheck::end_of_run`]), whether
//! its reset would have completed is unknown, so "reset complete" is not judged on it;
//! everything it did show (flux, currents, voltages, a reset end) still is.

use std::fmt;

use super::catalogue::figures;
use super::{probe_index, Figure, Measurement};
use super::{FigureDef, Value};
use crate::cycles::CycleRecord;
use crate::error::ModelError;
use crate::template::{ForwardDesign, Probe, ResetScheme};

figures! {
    PASS = "reset_check.pass", "1", Flag, Lower, Files,
        "core reset", "Whether every judged cycle reset the core within every criterion.";
    CYCLES = "reset_check.cycles", "1", Count, Neither, Files,
        "cycles judged", "Switching cycles the core-reset check judged.";
    FAILED_CYCLES = "reset_check.failed_cycles", "1", Count, Higher, Files,
        "failed cycles", "Cycles that failed a core-reset criterion.";
    LAST_CYCLE_CUT = "reset_check.last_cycle_cut", "1", Flag, Neither, Files,
        "last cycle cut", "Whether the run's end cut its last cycle short (that cycle is not judged on reset completion).";
    BSAT_CYCLE = "reset_check.bsat_crossed.cycle", "1", Count, Neither, Files,
        "Bsat first crossed in cycle", "First cycle whose peak flux density reached Bsat.";
    BSAT_TIME = "reset_check.bsat_crossed.time", "s", Instant, Neither, Files,
        "Bsat first crossed at", "Start of the first cycle whose peak flux density reached Bsat.";
    BSAT_B_PEAK = "reset_check.bsat_crossed.b_peak", "T", Number, Higher, Files,
        "flux density when Bsat was crossed", "Peak flux density of that cycle.";
    CYCLE = "reset_check.*.cycle", "1", Count, Neither, Reset,
        "cycle", "Number of the cycle (the first failing one, or the tightest).";
    TIME = "reset_check.*.time", "s", Instant, Neither, Files,
        "cycle start", "Start of the cycle.";
    DUTY = "reset_check.*.duty", "1", Fraction, Neither, Reset,
        "duty", "Duty of the cycle.";
    CRITERION = "reset_check.*.criterion", "1", Choice, Neither, Files,
        "tightest criterion", "The criterion with the smallest margin in the cycle: reset_incomplete, reset_margin, mag_current_start, flux_density, drain_voltage or a watched probe's name.";
    CRITERION_MARGIN = "reset_check.*.criterion_margin", "1", Fraction, Lower, Files,
        "tightest criterion margin", "Margin of the tightest criterion, a fraction of its limit (negative: failed).";
    RESET_MARGIN_PCT = "reset_check.*.reset_margin_pct", "%", Number, Lower, Reset,
        "reset margin", "Time from the end of reset to the next turn-on, percent of the period.";
    RESET_MARGIN = "reset_check.*.reset_margin", "s", Number, Lower, Files,
        "reset margin", "Time from the end of reset to the next turn-on.";
    RESET_INCOMPLETE = "reset_check.*.reset_incomplete", "1", Flag, Higher, Files,
        "reset incomplete", "Whether a reset diode still conducted at the next turn-on.";
    MAG_CURRENT_START = "reset_check.*.mag_current_start", "A", Number, Higher, Reset,
        "magnetising current at turn-on", "Magnetising current at the cycle's turn-on.";
    B_PEAK = "reset_check.*.b_peak", "T", Number, Higher, Reset,
        "peak flux density", "Peak flux density in the cycle.";
    FLUX_MARGIN_PCT = "reset_check.*.flux_margin_pct", "%", Number, Lower, Reset,
        "flux margin", "Margin of the peak flux density below Bsat, percent of Bsat.";
    DRAIN_PEAK = "reset_check.*.drain_peak", "V", Number, Higher, Reset,
        "drain peak", "Peak main-switch drain voltage in the cycle.";
    PROBE_PEAK = "reset_check.*.*.peak", "V", Number, Higher, Files,
        "peak", "Peak voltage of a watched probe in the cycle.";
    PROBE_RATING = "reset_check.*.*.rating", "V", Number, Neither, Files,
        "rating", "Voltage rating the watched probe is judged against.";
}

/// What a cycle is checked against.
#[derive(Clone, Debug, PartialEq)]
pub struct ResetLimits {
    /// Usable fraction of each voltage rating (1 = the rating itself; 0.8 is a common
    /// derating, common practice).
    pub voltage_derating: f64,
    /// Least time from reset end to the next turn-on, fraction of the period.
    pub min_reset_margin: f64,
    /// Largest magnetising current at turn-on, amperes.
    pub max_mag_start: f64,
    /// Least distance of the peak flux density below Bsat, fraction of Bsat.
    pub min_flux_margin: f64,
}

impl ResetLimits {
    /// The ratings as given, no margins required, and a residual magnetising current at
    /// turn-on of at most a tenth of the current that reaches Bsat (a choice of this
    /// project: a larger residual means the flux has started to walk).
    pub fn for_design(design: &ForwardDesign) -> Self {
        ResetLimits {
            voltage_derating: 1.0,
            min_reset_margin: 0.0,
            max_mag_start: 0.1 * design.transformer.knee_current(),
            min_flux_margin: 0.0,
        }
    }
}

/// One criterion of the check.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Criterion {
    /// A reset diode still conducted at the next turn-on.
    ResetIncomplete,
    /// Reset ended too close to the next turn-on.
    ResetMargin,
    /// Magnetising current at turn-on above the limit.
    MagnetisingStart,
    /// Peak flux density too close to (or above) Bsat.
    FluxDensity,
    /// Peak drain voltage above the main switch's derated rating.
    DrainVoltage,
    /// Peak voltage of a watched probe above its derated rating.
    Voltage(&'static str),
}

impl Criterion {
    /// Short name for figures and messages.
    pub fn name(self) -> &'static str {
        match self {
            Criterion::ResetIncomplete => "reset_incomplete",
            Criterion::ResetMargin => "reset_margin",
            Criterion::MagnetisingStart => "mag_current_start",
            Criterion::FluxDensity => "flux_density",
            Criterion::DrainVoltage => "drain_voltage",
            Criterion::Voltage(p) => p,
        }
    }
}

/// Most sample-watched voltages (rectifier, freewheel, reset path, high side).
const WATCHED: usize = 4;

/// A voltage probe watched against a rating.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Watch {
    name: &'static str,
    column: usize,
    /// −1 for a diode (reverse voltage is negative v), +1 for a switch.
    sign: f64,
    rating: f64,
}

/// One cycle's numbers and its worst criterion.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CycleCheck {
    /// The cycle record.
    pub record: CycleRecord,
    /// Reset end to next turn-on, fraction of the period (`None` without a reset end).
    pub reset_margin: Option<f64>,
    /// (Bsat − B_peak)/Bsat.
    pub flux_margin: f64,
    /// Peak of each watched voltage in this cycle: (probe, volts, rating volts).
    pub voltages: [Option<(&'static str, f64, f64)>; WATCHED],
    /// The criterion with the lowest margin and that margin (≥ 0 passes).
    pub worst: (Criterion, f64),
}

impl CycleCheck {
    /// Whether every criterion passed.
    pub fn passed(&self) -> bool {
        self.worst.1 >= 0.0
    }
}

/// The check's outcome so far.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ResetVerdict {
    /// Cycles checked.
    pub cycles: usize,
    /// Cycles that failed a criterion.
    pub failed: usize,
    /// The first cycle that failed.
    pub first_failure: Option<CycleCheck>,
    /// The cycle with the lowest margin (failed or not).
    pub worst: Option<CycleCheck>,
}

impl ResetVerdict {
    /// Whether every cycle passed.
    pub fn passed(&self) -> bool {
        self.failed == 0
    }
}

/// The streaming check.
#[derive(Clone, Debug)]
pub struct ResetCheck {
    limits: ResetLimits,
    bsat: f64,
    switch_rating: f64,
    watches: [Option<Watch>; WATCHED],
    peaks: [f64; WATCHED],
    verdict: ResetVerdict,
    /// The latest cycle, judged in full and as cut short; committed when the next one
    /// arrives, or at the end by whether the run cut it.
    latest: Option<(CycleCheck, CycleCheck)>,
    /// When the run ended, seconds, once told.
    run_end: Option<f64>,
    /// The first cycle whose peak flux density passed Bsat: (index, start s, B_peak T).
    bsat_crossed: Option<(usize, f64, f64)>,
}

fn reset_diode_rating(design: &ForwardDesign) -> Option<f64> {
    match &design.reset {
        ResetScheme::ResetWinding { diode } | ResetScheme::RcdClamp { diode, .. } => {
            Some(diode.reverse_rating)
        }
        ResetScheme::TwoSwitch { clamp_diode, .. } => Some(clamp_diode.reverse_rating),
        ResetScheme::ActiveClamp { .. } => None,
    }
}

impl ResetCheck {
    /// Checks runs of `design` whose probes are `probes`.
    pub fn new(
        design: &ForwardDesign,
        probes: &[Probe],
        limits: ResetLimits,
    ) -> Result<Self, ModelError> {
        if !(limits.voltage_derating > 0.0 && limits.max_mag_start > 0.0) {
            return Err(ModelError::Infeasible(format!(
                "reset check: derating and magnetising-current limit must be positive ({limits:?})"
            )));
        }
        let mut list = vec![
            ("rect.v", -1.0, Some(design.rectifier.reverse_rating)),
            ("fw.v", -1.0, Some(design.freewheel.reverse_rating)),
            ("reset.v", -1.0, reset_diode_rating(design)),
        ];
        if let ResetScheme::TwoSwitch { high_side, .. } = &design.reset {
            list.push(("sw.hi.v", 1.0, Some(high_side.voltage_rating)));
        }
        let mut watches = [None; WATCHED];
        for (slot, (name, sign, rating)) in watches.iter_mut().zip(list) {
            if let (Some(rating), Ok(column)) = (rating, probe_index(probes, name)) {
                *slot = Some(Watch {
                    name,
                    column,
                    sign,
                    rating,
                });
            }
        }
        Ok(ResetCheck {
            bsat: design.transformer.saturation_flux_density,
            switch_rating: design.switch.voltage_rating,
            limits,
            watches,
            peaks: [f64::NEG_INFINITY; WATCHED],
            verdict: ResetVerdict {
                cycles: 0,
                failed: 0,
                first_failure: None,
                worst: None,
            },
            latest: None,
            run_end: None,
            bsat_crossed: None,
        })
    }

    /// Tells the check when the run ended, seconds, so a last cycle cut short by it is
    /// not judged on a reset it had no time to finish.
    pub fn end_of_run(&mut self, time: f64) {
        self.run_end = Some(time);
    }

    /// The first cycle whose peak flux density passed Bsat: (index, start in seconds,
    /// peak in tesla).
    pub fn bsat_crossed(&self) -> Option<(usize, f64, f64)> {
        self.bsat_crossed
    }

    /// Whether the latest cycle was cut short by the run's end.
    pub fn last_cycle_cut(&self) -> bool {
        match (&self.latest, self.run_end) {
            // A thousandth of a period is far above rounding and far below any cut.
            (Some((full, _)), Some(end)) => {
                let r = &full.record;
                end < r.start + r.period * (1.0 - 1e-3)
            }
            _ => false,
        }
    }

    /// The verdict so far.
    pub fn verdict(&self) -> ResetVerdict {
        let mut v = self.verdict;
        if let Some((full, cut)) = self.latest {
            commit(&mut v, if self.last_cycle_cut() { cut } else { full });
        }
        v
    }

    fn judge(&self, r: &CycleRecord, cut: bool) -> CycleCheck {
        let l = &self.limits;
        let mut worst = (Criterion::ResetIncomplete, f64::INFINITY);
        let mut consider = |c: Criterion, m: f64| {
            if m < worst.1 {
                worst = (c, m);
            }
        };
        let reset_margin = r.reset_margin().map(|m| m / r.period);
        if r.reset_incomplete && !cut {
            consider(Criterion::ResetIncomplete, -1.0);
        } else if let Some(m) = reset_margin {
            consider(Criterion::ResetMargin, m - l.min_reset_margin);
        }
        consider(
            Criterion::MagnetisingStart,
            (l.max_mag_start - r.mag_current_start) / l.max_mag_start,
        );
        let flux_margin = (self.bsat - r.b_peak) / self.bsat;
        consider(Criterion::FluxDensity, flux_margin - l.min_flux_margin);
        let derated = |rating: f64| rating * l.voltage_derating;
        let d = derated(self.switch_rating);
        consider(Criterion::DrainVoltage, (d - r.drain_peak) / d);
        let mut voltages = [None; WATCHED];
        for ((w, peak), out) in self.watches.iter().zip(self.peaks).zip(&mut voltages) {
            if let Some(w) = w {
                if peak.is_finite() {
                    let d = derated(w.rating);
                    consider(Criterion::Voltage(w.name), (d - peak) / d);
                    *out = Some((w.name, peak, w.rating));
                }
            }
        }
        CycleCheck {
            record: *r,
            reset_margin,
            flux_margin,
            voltages,
            worst,
        }
    }
}

impl ResetCheck {
    /// Probes whose extremes the check reads (stress voltages), for the run to trace.
    pub fn probes(&self) -> Vec<usize> {
        self.watches.iter().flatten().map(|w| w.column).collect()
    }
}

impl Measurement for ResetCheck {
    fn sample(&mut self, _time: f64, values: &[f64], _at_event: bool) {
        for (w, peak) in self.watches.iter().zip(&mut self.peaks) {
            if let Some(&v) = w
                .and_then(|w| values.get(w.column).map(|v| v * w.sign))
                .as_ref()
            {
                *peak = peak.max(v);
            }
        }
    }

    fn cycle(&mut self, r: &CycleRecord) {
        if r.b_peak > self.bsat && self.bsat_crossed.is_none() {
            self.bsat_crossed = Some((r.index, r.start, r.b_peak));
        }
        let judged = (self.judge(r, false), self.judge(r, true));
        self.peaks = [f64::NEG_INFINITY; WATCHED];
        if let Some((full, _)) = self.latest.replace(judged) {
            commit(&mut self.verdict, full);
        }
    }

    fn figures(&self) -> Vec<Figure> {
        let v = &self.verdict();
        let mut f = vec![
            PASS.of(v.passed()),
            CYCLES.of(v.cycles),
            FAILED_CYCLES.of(v.failed),
            LAST_CYCLE_CUT.of(self.last_cycle_cut()),
        ];
        if let Some((index, start, b)) = self.bsat_crossed {
            f.push(BSAT_CYCLE.of(index));
            f.push(BSAT_TIME.of(start));
            f.push(BSAT_B_PEAK.of(b));
        }
        if let Some(c) = &v.first_failure {
            f.extend(cycle_figures("first_failure", c));
        }
        if let Some(c) = &v.worst {
            f.extend(cycle_figures("worst", c));
        }
        f
    }
}

/// Adds one judged cycle to the verdict.
fn commit(v: &mut ResetVerdict, check: CycleCheck) {
    v.cycles += 1;
    if !check.passed() {
        v.failed += 1;
        v.first_failure.get_or_insert(check);
    }
    if v.worst.is_none_or(|w| check.worst.1 < w.worst.1) {
        v.worst = Some(check);
    }
}

/// The numbers of one checked cycle, `which` being `first_failure` or `worst`.
fn cycle_figures(which: &str, c: &CycleCheck) -> Vec<Figure> {
    let r = &c.record;
    let at = |d: &'static FigureDef, v: Value| d.scoped(&[which], v);
    let mut f = vec![
        at(&CYCLE, r.index.into()),
        at(&TIME, r.start.into()),
        at(&DUTY, r.duty.into()),
        at(&CRITERION, c.worst.0.name().into()),
        at(&CRITERION_MARGIN, c.worst.1.into()),
        at(
            &RESET_MARGIN_PCT,
            c.reset_margin.map_or(f64::NAN, |m| 100.0 * m).into(),
        ),
        at(&RESET_MARGIN, r.reset_margin().unwrap_or(f64::NAN).into()),
        at(&RESET_INCOMPLETE, r.reset_incomplete.into()),
        at(&MAG_CURRENT_START, r.mag_current_start.into()),
        at(&B_PEAK, r.b_peak.into()),
        at(&FLUX_MARGIN_PCT, (100.0 * c.flux_margin).into()),
        at(&DRAIN_PEAK, r.drain_peak.into()),
    ];
    for (name, peak, rating) in c.voltages.iter().flatten() {
        f.push(PROBE_PEAK.scoped(&[which, name], *peak));
        f.push(PROBE_RATING.scoped(&[which, name], *rating));
    }
    f
}

impl fmt::Display for ResetVerdict {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match (&self.first_failure, &self.worst) {
            (Some(c), Some(w)) => write!(
                f,
                "FAIL: {} of {} cycles; first cycle {} at {:.6e} s ({}), worst cycle {} at \
                 {:.6e} s ({}, margin {:.3})",
                self.failed,
                self.cycles,
                c.record.index,
                c.record.start,
                c.worst.0.name(),
                w.record.index,
                w.record.start,
                w.worst.0.name(),
                w.worst.1
            ),
            (None, Some(w)) => write!(
                f,
                "PASS: {} cycles; tightest cycle {} at {:.6e} s ({}, margin {:.3})",
                self.cycles,
                w.record.index,
                w.record.start,
                w.worst.0.name(),
                w.worst.1
            ),
            _ => write!(f, "no cycles checked"),
        }
    }
}
