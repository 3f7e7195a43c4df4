//! The figure catalogue: every figure a run reports is declared once, beside the code
//! that produces it, as a [`FigureDef`] — its key, unit, kind, which direction is
//! worse, a label and a one-line description. Everything that reads figures (verdicts,
//! the terminal, `summary.json`, the study tables and their worst cases, the HTML
//! reports) reads these declarations instead of guessing from names.
//!
//! Keys are dotted; a `*` stands for one part the producer fills in (a step's label,
//! a probe's name, an element's name): `*.ripple_pp` is `out.v.ripple_pp` for the
//! output. [`find`] maps a concrete key back to its declaration.
//!
//! To add a figure: declare it in its module's `figures!` block and emit it with
//! [`FigureDef::of`] or [`FigureDef::scoped`]. Nothing else changes.

use std::borrow::Cow;

/// What a figure's value is.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Kind {
    /// A quantity in its unit.
    Number,
    /// A fraction (unit "1") that people read as a percentage: duty, efficiency.
    Fraction,
    /// Yes or no.
    Flag,
    /// One of a set of names (which criterion was tightest).
    Choice,
    /// When something happened, seconds into the run: where, not how good.
    Instant,
    /// A whole number of things (cycles).
    Count,
}

/// Which direction of a figure is worse, for worst-case tables.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Worse {
    /// Larger is worse: losses, peaks, ripple, overshoot, times to settle.
    Higher,
    /// Smaller is worse: margins, efficiency; for a flag, "no" is worse.
    Lower,
    /// Farther from zero is worse: an error of either sign.
    Magnitude,
    /// Not a quality: an operating point, a setting echoed back, a time or a cycle
    /// number saying where something was.
    Neither,
}

/// Where a person sees a figure among a run's key figures.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Section {
    /// Only in the files.
    Files,
    /// Start-up.
    StartUp,
    /// The steady window before the first disturbance.
    Steady,
    /// The tightest cycle of the core-reset check.
    Reset,
}

impl Section {
    /// Heading shown above the figures of the section.
    pub fn title(self) -> &'static str {
        match self {
            Section::Files => "other",
            Section::StartUp => "start-up",
            Section::Steady => "steady state",
            Section::Reset => "core reset, tightest cycle",
        }
    }
}

/// One figure's declaration.
#[derive(Debug, PartialEq)]
pub struct FigureDef {
    /// Dotted key; `*` marks a part filled in by the producer.
    pub key: &'static str,
    /// SI unit symbol, `%`, `1` for a pure number, or `*` for the unit of the probe
    /// the figure is measured on.
    pub unit: &'static str,
    /// What the value is.
    pub kind: Kind,
    /// Which direction is worse.
    pub worse: Worse,
    /// Short label for people ("time to 90 %").
    pub label: &'static str,
    /// One line on what it is.
    pub about: &'static str,
    /// Where it is shown among the key figures.
    pub section: Section,
}

/// A figure's value.
#[derive(Clone, Debug, PartialEq)]
pub enum Value {
    /// A number in the figure's unit; non-finite when it could not be computed.
    Number(f64),
    /// Yes or no.
    Flag(bool),
    /// One name of a set.
    Choice(Cow<'static, str>),
}

impl From<f64> for Value {
    fn from(v: f64) -> Self {
        Value::Number(v)
    }
}

impl From<bool> for Value {
    fn from(v: bool) -> Self {
        Value::Flag(v)
    }
}

impl From<usize> for Value {
    fn from(v: usize) -> Self {
        Value::Number(v as f64)
    }
}

impl From<&'static str> for Value {
    fn from(v: &'static str) -> Self {
        Value::Choice(Cow::Borrowed(v))
    }
}

/// One reported figure: a declaration, its concrete key and its value.
#[derive(Clone, Debug, PartialEq)]
pub struct Figure {
    /// What it is.
    pub def: &'static FigureDef,
    /// Concrete key, `def.key` with its `*` parts filled in.
    pub key: String,
    /// Its value.
    pub value: Value,
    /// Unit symbol: the declaration's, or the probe's where the declaration says `*`.
    pub unit: &'static str,
    /// Why there is no value, where there is none.
    pub reason: Option<String>,
}

impl FigureDef {
    /// This figure with `value` (its key has no `*` part).
    pub fn of(&'static self, value: impl Into<Value>) -> Figure {
        debug_assert!(!self.key.contains('*'), "{} needs its parts", self.key);
        Figure {
            def: self,
            key: self.key.to_string(),
            value: value.into(),
            unit: self.unit,
            reason: None,
        }
    }

    /// This figure with its `*` parts filled by `parts`, in order.
    pub fn scoped(&'static self, parts: &[&str], value: impl Into<Value>) -> Figure {
        let mut key = String::with_capacity(self.key.len() + 16);
        let mut parts = parts.iter();
        for (k, piece) in self.key.split('*').enumerate() {
            if k > 0 {
                key.push_str(parts.next().copied().unwrap_or("?"));
            }
            key.push_str(piece);
        }
        Figure {
            def: self,
            key,
            value: value.into(),
            unit: self.unit,
            reason: None,
        }
    }

    /// This figure under a concrete `key` already filled in (read back from a file).
    pub fn of_key(&'static self, key: &str, value: impl Into<Value>) -> Figure {
        Figure {
            def: self,
            key: key.to_string(),
            value: value.into(),
            unit: self.unit,
            reason: None,
        }
    }

    /// Whether a concrete key is an instance of this declaration.
    pub fn matches(&self, key: &str) -> bool {
        let (pattern, text) = (self.key.as_bytes(), key.as_bytes());
        literal_ends_agree(pattern, text) && glob(pattern, text)
    }
}

/// Whether `text` starts with what `pattern` has before its first `*` and ends with
/// what it has after its last: true of every match, and false of most keys a
/// declaration is tried on, so the search of [`glob`] runs for few of them.
fn literal_ends_agree(pattern: &[u8], text: &[u8]) -> bool {
    let head = pattern.split(|&c| c == b'*').next().unwrap_or_default();
    let tail = pattern.rsplit(|&c| c == b'*').next().unwrap_or_default();
    text.starts_with(head) && text.ends_with(tail)
}

/// `*` matches one or more characters.
fn glob(pattern: &[u8], text: &[u8]) -> bool {
    match pattern.split_first() {
        None => text.is_empty(),
        Some((b'*', rest)) => (1..=text.len()).any(|k| glob(rest, &text[k..])),
        Some((c, rest)) => text.first() == Some(c) && glob(rest, &text[1..]),
    }
}

impl Figure {
    /// The same figure in `unit`, for declarations whose unit is the probe's (`*`).
    pub fn in_unit(mut self, unit: &'static str) -> Self {
        self.unit = unit;
        self
    }

    /// The same figure with the reason it has no value.
    pub fn because(mut self, reason: impl Into<String>) -> Self {
        self.reason = Some(reason.into());
        self
    }

    /// The value as a number: numbers when finite, flags as 1 (yes) or 0 (no); `None`
    /// for choices and for what could not be computed.
    pub fn number(&self) -> Option<f64> {
        match &self.value {
            Value::Number(v) => v.is_finite().then_some(*v),
            Value::Flag(b) => Some(f64::from(u8::from(*b))),
            Value::Choice(_) => None,
        }
    }

    /// The flag's value, for flags.
    pub fn flag(&self) -> Option<bool> {
        match self.value {
            Value::Flag(b) => Some(b),
            _ => None,
        }
    }

    /// The choice's name, for choices.
    pub fn choice(&self) -> Option<&str> {
        match &self.value {
            Value::Choice(c) => Some(c),
            _ => None,
        }
    }

    /// Whether the figure has a value.
    pub fn has_value(&self) -> bool {
        !matches!(self.value, Value::Number(v) if !v.is_finite())
    }
}

impl std::fmt::Display for Figure {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match &self.value {
            Value::Number(v) => write!(f, "{} = {v:.6e} {}", self.key, self.unit),
            Value::Flag(b) => write!(f, "{} = {b}", self.key),
            Value::Choice(c) => write!(f, "{} = {c}", self.key),
        }
    }
}

/// Declares figures and the module's list of them.
macro_rules! figures {
    ($(
        $(#[$m:meta])*
        $id:ident = $key:literal, $unit:literal, $kind:ident, $worse:ident, $section:ident,
            $label:literal, $about:literal;
    )*) => {
        $(
            $(#[$m])*
            #[doc = $about]
            pub static $id: $crate::measure::catalogue::FigureDef =
                $crate::measure::catalogue::FigureDef {
                    key: $key,
                    unit: $unit,
                    kind: $crate::measure::catalogue::Kind::$kind,
                    worse: $crate::measure::catalogue::Worse::$worse,
                    section: $crate::measure::catalogue::Section::$section,
                    label: $label,
                    about: $about,
                };
        )*
        /// Every figure this module declares.
        pub static FIGURES: &[&$crate::measure::catalogue::FigureDef] = &[$(&$id),*];
    };
}
pub(crate) use figures;

/// Every declared figure, by module.
pub fn all() -> impl Iterator<Item = &'static FigureDef> {
    [
        super::startup::FIGURES,
        super::step::FIGURES,
        super::ripple::FIGURES,
        super::efficiency::FIGURES,
        super::coss::FIGURES,
        super::part_losses::FIGURES,
        super::reset_check::FIGURES,
        crate::figures::FIGURES,
        crate::loopgain::FIGURES,
    ]
    .into_iter()
    .flatten()
    .copied()
}

/// The declaration of a concrete key: an exact key first, else the pattern with the
/// most fixed characters that matches.
pub fn find(key: &str) -> Option<&'static FigureDef> {
    all()
        .filter(|d| d.matches(key))
        .max_by_key(|d| d.key.len() - d.key.matches('*').count())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_key_is_declared_once() {
        let mut keys: Vec<&str> = all().map(|d| d.key).collect();
        let n = keys.len();
        keys.sort_unstable();
        keys.dedup();
        assert_eq!(keys.len(), n, "a key declared twice");
    }

    #[test]
    fn scoped_keys_find_their_declaration() {
        for d in all() {
            let f = d.scoped(&["a", "b"], 1.0);
            assert_eq!(find(&f.key), Some(d), "{} -> {}", d.key, f.key);
        }
        // Probe names carry a dot of their own.
        let ripple = find("out.v.ripple_pp").map(|d| d.key);
        assert_eq!(ripple, Some("*.ripple_pp"));
        let peak = find("reset_check.worst.rect.v.peak").map(|d| d.key);
        assert_eq!(peak, Some("reset_check.*.*.peak"));
    }

    #[test]
    fn glob_parts_are_never_empty() {
        assert!(glob(b"*.mean", b"out.v.mean"));
        assert!(!glob(b"*.mean", b".mean"));
        assert!(glob(b"a.*.*.peak", b"a.worst.rect.v.peak"));
        assert!(!glob(b"a.*.peak", b"a.drain_peak"));
        // The literal ends are a necessary condition only: they agree here, the
        // whole pattern does not.
        assert!(literal_ends_agree(b"a*a", b"a") && !glob(b"a*a", b"a"));
        assert!(!literal_ends_agree(b"*.mean", b"out.v.peak"));
    }
}
