//! Response to a load or line step: undershoot and overshoot, recovery into a band,
//! steady-state error, and how far the duty moved.

use stepflux_engine::TracePoint;

use super::catalogue::figures;
use super::window::{crossing, CycleRange, WindowExtremes, WindowMean};
use super::{at_point, percent, probe_index, Figure, Measurement};
use crate::cycles::CycleRecord;
use crate::error::ModelError;
use crate::template::Probe;

figures! {
    UNDERSHOOT = "*.undershoot", "V", Number, Higher, Files,
        "undershoot", "Largest fall of the output below the set point after a step, volts.";
    UNDERSHOOT_PCT = "*.undershoot_pct", "%", Number, Higher, Files,
        "undershoot", "Largest fall below the set point after a step, percent of the set point.";
    OVERSHOOT = "*.overshoot", "V", Number, Higher, Files,
        "overshoot", "Largest rise of the output above the set point after a step, volts.";
    OVERSHOOT_PCT = "*.overshoot_pct", "%", Number, Higher, Files,
        "overshoot", "Largest rise above the set point after a step, percent of the set point.";
    MIN_TIME = "*.min_time", "s", Instant, Neither, Files,
        "lowest at", "When the output was lowest after the step.";
    BAND_PCT = "*.band_pct", "%", Number, Neither, Files,
        "recovery band", "Half-width of the recovery band, percent of the set point.";
    RECOVERY = "*.recovery", "s", Number, Higher, Files,
        "recovery", "Time from the step until the output stays inside the recovery band.";
    STEADY_ERROR = "*.steady_error", "V", Number, Magnitude, Files,
        "steady error", "Mean output minus the set point at the end of the step's window.";
    STEADY_ERROR_PCT = "*.steady_error_pct", "%", Number, Magnitude, Files,
        "steady error", "Steady error, percent of the set point.";
    DUTY_SPREAD_BEFORE = "*.duty_spread_before", "1", Fraction, Higher, Files,
        "duty spread before", "Range of duty over the window before the step.";
    DUTY_SPREAD_AFTER = "*.duty_spread_after", "1", Fraction, Higher, Files,
        "duty spread after", "Range of duty over the settled window after the step.";
    DUTY_MIN_AFTER = "*.duty_min_after", "1", Fraction, Neither, Files,
        "lowest duty after", "Lowest duty in the settled window after the step.";
    DUTY_MAX_AFTER = "*.duty_max_after", "1", Fraction, Neither, Files,
        "highest duty after", "Highest duty in the settled window after the step.";
}

/// Settings of a [`StepResponse`].
#[derive(Clone, Debug, PartialEq)]
pub struct StepSettings {
    /// Prefix of the figure names, e.g. `load_step`.
    pub label: String,
    /// When the step starts, seconds.
    pub step_time: f64,
    /// Set point of the output, volts.
    pub set_point: f64,
    /// Half-width of the recovery band as a fraction of the set point (0.01 = ±1 %).
    pub band: f64,
    /// Length of the duty windows before and after the step, seconds.
    pub duty_window: f64,
    /// Start of the final window for the steady-state error, seconds.
    pub settle_from: f64,
    /// End of everything this measurement looks at (the next disturbance or the end
    /// of the run), seconds. The window is half-open: samples at `until` itself belong
    /// to whatever happens there.
    pub until: f64,
}

/// Step-response figures of `out.v`.
///
/// Recovery time is measured from the step to the moment the output last enters the
/// band `set point ± band` (interpolated between the sample outside and the one
/// inside); a streaming run cannot know it has stayed inside for good, so the figure
/// holds for the samples seen up to `until`. Extremes include the switching ripple.
///
/// A change of the set point itself ([`StepResponse::set_point_change`]) is judged
/// against the new set point, as a supply's transient specification reads: overshoot
/// past it, and on the side the output comes from, only what it falls back after
/// first reaching the new value — the approach itself is the response asked for, not
/// a deviation. An output that never reaches the new value reports its shortfall
/// there instead.
#[derive(Clone, Debug)]
pub struct StepResponse {
    settings: StepSettings,
    column: usize,
    /// The set point before a set-point change (`None` for a load or line step).
    from: Option<f64>,
    /// Whether the output has reached the new set point (set-point change only).
    reached: bool,
    /// Extremes from the moment it did.
    after_reach: WindowExtremes,
    extremes: WindowExtremes,
    final_mean: WindowMean,
    before: CycleRange,
    after: CycleRange,
    /// Last point: time, value, slope (NaN when unknown).
    last: Option<(f64, f64, f64)>,
    ever_outside: bool,
    entered: Option<f64>,
}

/// What [`StepResponse`] found.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StepResult {
    /// Lowest output after the step, volts, and when, seconds.
    pub min: (f64, f64),
    /// Highest output after the step, volts, and when, seconds.
    pub max: (f64, f64),
    /// Set point minus the lowest output (0 if never below), volts.
    pub undershoot: f64,
    /// Highest output minus the set point (0 if never above), volts.
    pub overshoot: f64,
    /// Seconds from the step until the output last entered the band; 0 if it never
    /// left; `None` if the last sample was outside.
    pub recovery: Option<f64>,
    /// Mean output over the final window minus the set point, volts.
    pub steady_error: Option<f64>,
    /// Duty spread (max − min) over the window before the step.
    pub duty_spread_before: Option<f64>,
    /// Duty spread over the window after the step.
    pub duty_spread_after: Option<f64>,
    /// Lowest and highest duty in the window after the step.
    pub duty_range_after: Option<(f64, f64)>,
}

impl StepResponse {
    /// Watches `out.v` around a step.
    pub fn new(probes: &[Probe], settings: StepSettings) -> Result<Self, ModelError> {
        let s = &settings;
        let ok = s.set_point > 0.0
            && s.band > 0.0
            && s.duty_window > 0.0
            && s.until > s.step_time
            && s.settle_from >= s.step_time
            && s.settle_from < s.until;
        if !ok {
            return Err(ModelError::Infeasible(format!(
                "{}: set point, band and duty window must be positive and \
                 step_time ≤ settle_from < until (got {s:?})",
                s.label
            )));
        }
        Ok(StepResponse {
            column: probe_index(probes, "out.v")?,
            from: None,
            reached: false,
            after_reach: WindowExtremes::new(s.step_time, s.until),
            extremes: WindowExtremes::new(s.step_time, s.until),
            final_mean: WindowMean::new(s.settle_from, s.until),
            before: CycleRange::new(s.step_time - s.duty_window, s.step_time),
            after: CycleRange::new(s.step_time, s.step_time + s.duty_window),
            last: None,
            ever_outside: false,
            entered: None,
            settings,
        })
    }

    /// Watches `out.v` after the set point moves from `from` to
    /// `settings.set_point` volts (see the type's documentation).
    pub fn set_point_change(
        probes: &[Probe],
        settings: StepSettings,
        from: f64,
    ) -> Result<Self, ModelError> {
        if !(from.is_finite() && from > 0.0) {
            return Err(ModelError::Infeasible(format!(
                "{}: the set point before the change must be positive (got {from} V)",
                settings.label
            )));
        }
        let mut s = StepResponse::new(probes, settings)?;
        s.from = Some(from);
        Ok(s)
    }

    /// The extremes of the output, with the approach to a new set point left out
    /// (see the type's documentation).
    fn judged_extremes(&self) -> Option<((f64, f64), (f64, f64))> {
        let (min, max) = (self.extremes.min?, self.extremes.max?);
        let Some(from) = self.from else {
            return Some((min, max));
        };
        let rising = self.settings.set_point > from;
        if !self.reached {
            // Never got there: the closest approach is the extreme on both sides.
            let closest = if rising { max } else { min };
            return Some((closest, closest));
        }
        let (lo, hi) = (self.after_reach.min?, self.after_reach.max?);
        Some(if rising { (lo, max) } else { (min, hi) })
    }

    /// The settings.
    pub fn settings(&self) -> &StepSettings {
        &self.settings
    }

    /// The probe watched (its index).
    pub fn column(&self) -> usize {
        self.column
    }

    /// The figures so far, or `None` before any sample after the step.
    pub fn result(&self) -> Option<StepResult> {
        let s = &self.settings;
        let (min, max) = self.judged_extremes()?;
        let recovery = match (self.ever_outside, self.entered) {
            (false, _) => Some(0.0),
            (true, Some(t)) => Some(t - s.step_time),
            (true, None) => None,
        };
        Some(StepResult {
            min,
            max,
            undershoot: (s.set_point - min.1).max(0.0),
            overshoot: (max.1 - s.set_point).max(0.0),
            recovery,
            steady_error: self.final_mean.mean().map(|m| m - s.set_point),
            duty_spread_before: self.before.spread(),
            duty_spread_after: self.after.spread(),
            duty_range_after: self.after.min.zip(self.after.max),
        })
    }

    /// Tracks band exits and the last entry.
    fn track_band(&mut self, t: f64, v: f64, slope: f64) {
        let s = &self.settings;
        let half = s.band * s.set_point;
        let outside = (v - s.set_point).abs() > half;
        if outside {
            self.ever_outside = true;
            self.entered = None;
        } else if let Some((t0, v0, d0)) = self.last {
            let was_outside = (v0 - s.set_point).abs() > half;
            if was_outside && t > t0 {
                let edge = s.set_point + half * (v0 - s.set_point).signum();
                self.entered = Some(crossing(t0, v0, d0, t, v, slope, edge));
            }
        }
    }
}

impl StepResponse {
    /// One point of the output, with its slope (NaN when unknown).
    fn observe(&mut self, time: f64, v: f64, slope: f64) {
        if time < self.settings.step_time || time >= self.settings.until {
            return;
        }
        if let Some(from) = self.from {
            let target = self.settings.set_point;
            self.reached |= (v - target) * (target - from) >= 0.0;
            if self.reached {
                self.after_reach.add(time, v);
            }
        }
        self.extremes.add(time, v);
        self.final_mean.add_with_slope(time, v, slope);
        self.track_band(time, v, slope);
        self.last = Some((time, v, slope));
    }
}

impl Measurement for StepResponse {
    fn sample(&mut self, time: f64, values: &[f64], _at_event: bool) {
        if let Some(&v) = values.get(self.column) {
            self.observe(time, v, f64::NAN);
        }
    }

    fn trace(&mut self, point: &TracePoint<'_>) {
        if let Some((time, v, slope)) = at_point(point, self.column) {
            self.observe(time, v, slope);
        }
    }

    fn cycle(&mut self, r: &CycleRecord) {
        self.before.add(r.start, r.duty);
        self.after.add(r.start, r.duty);
    }

    fn figures(&self) -> Vec<Figure> {
        let Some(r) = self.result() else {
            return Vec::new();
        };
        let s = &self.settings;
        let l = &s.label;
        let opt = |x: Option<f64>| x.unwrap_or(f64::NAN);
        let at = |d: &'static super::FigureDef, v: f64| d.scoped(&[l.as_str()], v);
        let mut f = vec![
            at(&UNDERSHOOT, r.undershoot),
            at(&UNDERSHOOT_PCT, percent(r.undershoot, s.set_point)),
            at(&OVERSHOOT, r.overshoot),
            at(&OVERSHOOT_PCT, percent(r.overshoot, s.set_point)),
            at(&MIN_TIME, r.min.0),
            at(&BAND_PCT, 100.0 * s.band),
            at(&RECOVERY, opt(r.recovery)),
            at(&STEADY_ERROR, opt(r.steady_error)),
            at(
                &STEADY_ERROR_PCT,
                opt(r.steady_error.map(|e| percent(e, s.set_point))),
            ),
            at(&DUTY_SPREAD_BEFORE, opt(r.duty_spread_before)),
            at(&DUTY_SPREAD_AFTER, opt(r.duty_spread_after)),
        ];
        if let Some((lo, hi)) = r.duty_range_after {
            f.push(at(&DUTY_MIN_AFTER, lo));
            f.push(at(&DUTY_MAX_AFTER, hi));
        }
        f
    }
}
