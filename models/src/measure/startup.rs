//! Start-up: time to 90 % of the set point, overshoot, monotonic rise, and the largest
//! duty the controller reached on the way.

use stepflux_engine::TracePoint;

use super::catalogue::figures;
use super::window::crossing;
use super::{at_point, percent, probe_index, Figure, Measurement};
use crate::cycles::CycleRecord;
use crate::error::ModelError;
use crate::template::Probe;

figures! {
    T90 = "startup.t90", "s", Number, Higher, StartUp,
        "time to 90 %", "Time from the start to the output's first reaching 90 % of the set point.";
    PEAK = "startup.peak", "V", Number, Neither, StartUp,
        "peak", "Highest output voltage during start-up.";
    PEAK_TIME = "startup.peak_time", "s", Instant, Neither, StartUp,
        "peak at", "When the start-up peak was reached.";
    OVERSHOOT = "startup.overshoot", "V", Number, Higher, Files,
        "overshoot", "Start-up peak above the set point, volts.";
    OVERSHOOT_PCT = "startup.overshoot_pct", "%", Number, Higher, StartUp,
        "overshoot", "Start-up peak above the set point, percent of the set point.";
    MAX_DIP = "startup.max_dip_before_t90", "V", Number, Higher, Files,
        "largest dip before 90 %", "Largest fall below the running maximum before 90 % of the set point.";
    DIP_ALLOWANCE = "startup.dip_allowance", "V", Number, Neither, Files,
        "dip allowance", "Dip tolerated in a monotonic rise (about the switching ripple).";
    MONOTONIC = "startup.monotonic", "1", Flag, Lower, StartUp,
        "monotonic rise", "Whether the output rose to 90 % without a dip beyond the allowance.";
    MAX_DUTY = "startup.max_duty", "1", Fraction, Higher, StartUp,
        "largest duty", "Largest duty cycle of any cycle during start-up.";
    MAX_DUTY_TIME = "startup.max_duty_time", "s", Instant, Neither, Files,
        "largest duty at", "Start of the cycle with the largest start-up duty.";
    MAX_DUTY_CYCLE = "startup.max_duty_cycle", "1", Count, Neither, Files,
        "largest duty in cycle", "Number of the cycle with the largest start-up duty.";
}

/// Start-up figures of the output voltage over `[from, to]`.
///
/// Monotonic is defined with a ripple allowance: until the output first reaches 90 %
/// of the set point it never falls more than `dip_allowance` volts below the highest
/// value it had reached so far. The allowance should sit above the switching ripple
/// (which would otherwise count as a dip every period) and below a dip that matters.
#[derive(Clone, Debug)]
pub struct StartUp {
    column: usize,
    set_point: f64,
    dip_allowance: f64,
    from: f64,
    to: f64,
    /// Last point: time, value, slope (NaN when unknown).
    last: Option<(f64, f64, f64)>,
    t90: Option<f64>,
    running_max: f64,
    max_dip: f64,
    peak: Option<(f64, f64)>,
    max_duty: Option<(f64, f64, usize)>,
}

/// What [`StartUp`] found.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StartUpResult {
    /// Seconds from `from` until the output first reached 90 % of the set point
    /// (interpolated between samples); `None` if it never did.
    pub t90: Option<f64>,
    /// Highest output, volts, and when, seconds.
    pub peak: (f64, f64),
    /// Peak above the set point, volts (0 if it never exceeded it).
    pub overshoot: f64,
    /// Overshoot as a percentage of the set point.
    pub overshoot_percent: f64,
    /// Largest fall below the running maximum before 90 % was reached, volts.
    pub max_dip: f64,
    /// Whether `max_dip` stayed within the allowance.
    pub monotonic: bool,
    /// Largest duty of any cycle that started in the window, with its start time
    /// (seconds) and cycle index; `None` without cycles.
    pub max_duty: Option<(f64, f64, usize)>,
}

impl StartUp {
    /// Watches `out.v` from `from` to `to` seconds against `set_point` volts, allowing
    /// dips of `dip_allowance` volts before 90 % (see the type's documentation).
    pub fn new(
        probes: &[Probe],
        set_point: f64,
        dip_allowance: f64,
        from: f64,
        to: f64,
    ) -> Result<Self, ModelError> {
        if !(set_point > 0.0 && dip_allowance >= 0.0 && to > from) {
            return Err(ModelError::Infeasible(format!(
                "start-up: set point {set_point} V, dip allowance {dip_allowance} V and window \
                 [{from}, {to}] s must be positive, non-negative and non-empty"
            )));
        }
        Ok(StartUp {
            column: probe_index(probes, "out.v")?,
            set_point,
            dip_allowance,
            from,
            to,
            last: None,
            t90: None,
            running_max: f64::NEG_INFINITY,
            max_dip: 0.0,
            peak: None,
            max_duty: None,
        })
    }

    /// The probe watched (its index).
    pub fn column(&self) -> usize {
        self.column
    }

    /// The figures so far, or `None` before any sample in the window.
    pub fn result(&self) -> Option<StartUpResult> {
        let peak = self.peak?;
        let overshoot = (peak.1 - self.set_point).max(0.0);
        Some(StartUpResult {
            t90: self.t90.map(|t| t - self.from),
            peak,
            overshoot,
            overshoot_percent: percent(overshoot, self.set_point),
            max_dip: self.max_dip,
            monotonic: self.max_dip <= self.dip_allowance,
            max_duty: self.max_duty,
        })
    }
}

impl StartUp {
    /// One point of the output, with its slope (NaN when unknown).
    fn observe(&mut self, time: f64, v: f64, slope: f64) {
        if time < self.from || time > self.to {
            return;
        }
        let level = 0.9 * self.set_point;
        if self.t90.is_none() {
            if v >= level {
                // Where the output between the last two points crosses the level.
                self.t90 = Some(match self.last {
                    Some((t0, v0, d0)) if v0 < level && v > v0 => {
                        crossing(t0, v0, d0, time, v, slope, level)
                    }
                    _ => time,
                });
            } else {
                self.running_max = self.running_max.max(v);
                self.max_dip = self.max_dip.max(self.running_max - v);
            }
        }
        if self.peak.is_none_or(|(_, p)| v > p) {
            self.peak = Some((time, v));
        }
        self.last = Some((time, v, slope));
    }
}

impl Measurement for StartUp {
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
        if r.start >= self.from && r.start <= self.to && self.max_duty.is_none_or(|m| r.duty > m.0)
        {
            self.max_duty = Some((r.duty, r.start, r.index));
        }
    }

    fn figures(&self) -> Vec<Figure> {
        let Some(r) = self.result() else {
            return Vec::new();
        };
        let mut f = vec![
            T90.of(r.t90.unwrap_or(f64::NAN)),
            PEAK.of(r.peak.1),
            PEAK_TIME.of(r.peak.0),
            OVERSHOOT.of(r.overshoot),
            OVERSHOOT_PCT.of(r.overshoot_percent),
            MAX_DIP.of(r.max_dip),
            DIP_ALLOWANCE.of(self.dip_allowance),
            MONOTONIC.of(r.monotonic),
        ];
        if let Some((d, t, k)) = r.max_duty {
            f.push(MAX_DUTY.of(d));
            f.push(MAX_DUTY_TIME.of(t));
            f.push(MAX_DUTY_CYCLE.of(k));
        }
        f
    }
}
