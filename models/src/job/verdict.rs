//! The spec limits a job is judged against: each limit is declared once ([`LIMITS`]),
//! naming the catalogue figures it bounds by identity, never by a name's prefix.

use super::Limits;
use crate::loopgain;
use crate::measure::{efficiency, reset_check, ripple, startup, step, Figure, FigureDef};

/// Which side of the bound passes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Bound {
    /// The value must not exceed the bound.
    AtMost,
    /// The value must not fall below the bound.
    AtLeast,
}

impl Bound {
    /// As written in files: `max` or `min`.
    pub fn as_str(self) -> &'static str {
        match self {
            Bound::AtMost => "max",
            Bound::AtLeast => "min",
        }
    }
}

/// One spec limit.
#[derive(Debug)]
pub struct LimitDef {
    /// The scenario's field under `limits`.
    pub field: &'static str,
    /// What it bounds, for people.
    pub label: &'static str,
    /// Unit of the bound.
    pub unit: &'static str,
    /// Which side passes.
    pub bound: Bound,
    /// The figures it bounds; the worst of every instance (every step) is judged.
    pub figures: &'static [&'static FigureDef],
    /// Only the instance with this key (the output's ripple among every probe's).
    pub only: Option<&'static str>,
    /// Factor from the figures' unit to the bound's (a fraction judged in percent).
    pub scale: f64,
    /// The bound a job sets, if any.
    pub get: fn(&Limits) -> Option<f64>,
}

/// Every limit, in the order verdicts are reported.
pub static LIMITS: [LimitDef; 12] = [
    LimitDef {
        field: "startup_overshoot_pct",
        label: "start-up overshoot",
        unit: "%",
        bound: Bound::AtMost,
        figures: &[&startup::OVERSHOOT_PCT],
        only: None,
        scale: 1.0,
        get: |l| l.startup_overshoot_percent,
    },
    LimitDef {
        field: "startup_t90",
        label: "start-up time to 90 %",
        unit: "s",
        bound: Bound::AtMost,
        figures: &[&startup::T90],
        only: None,
        scale: 1.0,
        get: |l| l.startup_time,
    },
    LimitDef {
        field: "step_deviation_pct",
        label: "step deviation",
        unit: "%",
        bound: Bound::AtMost,
        figures: &[&step::UNDERSHOOT_PCT, &step::OVERSHOOT_PCT],
        only: None,
        scale: 1.0,
        get: |l| l.step_deviation_percent,
    },
    LimitDef {
        field: "step_recovery",
        label: "step recovery",
        unit: "s",
        bound: Bound::AtMost,
        figures: &[&step::RECOVERY],
        only: None,
        scale: 1.0,
        get: |l| l.recovery_time,
    },
    LimitDef {
        field: "ripple_pp",
        label: "output ripple",
        unit: "V",
        bound: Bound::AtMost,
        figures: &[&ripple::RIPPLE_PP],
        only: Some("out.v.ripple_pp"),
        scale: 1.0,
        get: |l| l.ripple,
    },
    LimitDef {
        field: "reset_margin_pct",
        label: "reset margin",
        unit: "%",
        bound: Bound::AtLeast,
        figures: &[&reset_check::RESET_MARGIN_PCT],
        only: None,
        scale: 1.0,
        get: |l| l.reset_margin_percent,
    },
    LimitDef {
        field: "flux_margin_pct",
        label: "flux margin",
        unit: "%",
        bound: Bound::AtLeast,
        figures: &[&reset_check::FLUX_MARGIN_PCT],
        only: None,
        scale: 1.0,
        get: |l| l.flux_margin_percent,
    },
    LimitDef {
        field: "efficiency_pct",
        label: "efficiency",
        unit: "%",
        bound: Bound::AtLeast,
        figures: &[&efficiency::EFFICIENCY_STAGE],
        only: None,
        scale: 100.0,
        get: |l| l.efficiency_percent,
    },
    LimitDef {
        field: "phase_margin_degrees",
        label: "phase margin",
        unit: "°",
        bound: Bound::AtLeast,
        figures: &[&loopgain::PHASE_MARGIN],
        only: None,
        scale: 1.0,
        get: |l| l.phase_margin_degrees,
    },
    LimitDef {
        field: "gain_margin_db",
        label: "gain margin",
        unit: "dB",
        bound: Bound::AtLeast,
        figures: &[&loopgain::GAIN_MARGIN],
        only: None,
        scale: 1.0,
        get: |l| l.gain_margin_db,
    },
    LimitDef {
        field: "crossover_min",
        label: "loop crossover",
        unit: "Hz",
        bound: Bound::AtLeast,
        figures: &[&loopgain::CROSSOVER],
        only: None,
        scale: 1.0,
        get: |l| l.crossover_min,
    },
    LimitDef {
        field: "crossover_max",
        label: "loop crossover",
        unit: "Hz",
        bound: Bound::AtMost,
        figures: &[&loopgain::CROSSOVER],
        only: None,
        scale: 1.0,
        get: |l| l.crossover_max,
    },
];

/// The limit declared for a scenario field.
pub fn find_limit(field: &str) -> Option<&'static LimitDef> {
    LIMITS.iter().find(|l| l.field == field)
}

/// A figure judged against a limit.
#[derive(Clone, Debug, PartialEq)]
pub struct Verdict {
    /// Which limit.
    pub limit: &'static LimitDef,
    /// The judged value in the bound's unit (`None`: not measured, which fails).
    pub value: Option<f64>,
    /// The bound.
    pub bound: f64,
    /// Whether it holds.
    pub pass: bool,
    /// Why `value` is missing; `None` when there is a value.
    pub reason: Option<String>,
}

impl PartialEq for LimitDef {
    fn eq(&self, other: &Self) -> bool {
        self.field == other.field
    }
}

impl Verdict {
    /// Signed distance to the bound in its unit, positive when passing.
    pub fn margin(&self) -> Option<f64> {
        self.value.map(|x| match self.limit.bound {
            Bound::AtMost => self.bound - x,
            Bound::AtLeast => x - self.bound,
        })
    }
}

impl LimitDef {
    /// The judged value among `figures`: the worst instance of any bounded figure,
    /// `None` when there is none or one has no value.
    fn value(&self, figures: &[Figure]) -> Option<f64> {
        let mut found = figures
            .iter()
            .filter(|f| self.figures.iter().any(|d| std::ptr::eq(*d, f.def)))
            .filter(|f| self.only.is_none_or(|k| f.key == k))
            .map(|f| f.number().map(|v| v * self.scale))
            .peekable();
        found.peek()?;
        let values: Option<Vec<f64>> = found.collect();
        values?.into_iter().reduce(match self.bound {
            Bound::AtMost => f64::max,
            Bound::AtLeast => f64::min,
        })
    }

    /// This limit judged on `figures` against `bound`.
    pub fn judge(&'static self, bound: f64, figures: &[Figure]) -> Verdict {
        let value = self.value(figures);
        let pass = value.is_some_and(|x| match self.bound {
            Bound::AtMost => x <= bound,
            Bound::AtLeast => x >= bound,
        });
        Verdict {
            limit: self,
            value,
            bound,
            pass,
            reason: None,
        }
    }
}

/// The verdicts a job's limits ask for, from the measured figures.
pub fn verdicts(limits: &Limits, figures: &[Figure]) -> Vec<Verdict> {
    LIMITS
        .iter()
        .filter_map(|l| (l.get)(limits).map(|b| l.judge(b, figures)))
        .collect()
}
