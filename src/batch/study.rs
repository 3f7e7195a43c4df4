//! The study file: which scenario to start from, which of its values to vary, and how.
//!
//! ```json
//! {
//!   "name": "line-load",
//!   "base": "demo-startup.json",
//!   "parameters": { "vin": "converter.input.voltage", "cout": "converter.output_capacitor.capacitance" },
//!   "corners": { "vin": ["18 V", "24 V", "32 V"] },
//!   "sweeps": [ { "points": 3, "scale": "log", "ranges": { "cout": { "start": "100 uF", "stop": "470 uF" } } } ],
//!   "monte_carlo": { "samples": 10, "seed": 7, "tolerances": { "cout": { "uniform_percent": 20 } } },
//!   "limits": { "ripple_pp": "60 mV" }
//! }
//! ```
//!
//! Parameters are named once and addressed by a dotted path into the scenario JSON,
//! with `[n]` for array elements (`disturbances[0].line.to`). The cases are the Cartesian
//! product of every corner list and every sweep (the parameters of one sweep move
//! together), each crossed with every Monte Carlo sample; see [`super::cases`].

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use anyhow::{anyhow, bail, Context, Result};
use schemars::JsonSchema;
use serde::Deserialize;
use serde_json::Value;

use super::path::JsonPath;
use super::value::{compatible_units, StudyValue};
use crate::scenario::document;

/// Longest study name: leaves room for the case suffix within the 64 characters a
/// scenario name may have.
const NAME_MAX: usize = 48;

/// Most cases one study may expand to; beyond this a typo (a sweep of 1e6 points) is
/// far likelier than intent, and the plan alone would fill memory.
pub const MAX_CASES: usize = 1_000_000;

/// A stepflux study: one base scenario run many times with some of its values changed.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct StudyFile {
    /// Optional reference to the JSON Schema, for editors; ignored by stepflux.
    #[serde(rename = "$schema", default)]
    #[allow(dead_code)]
    // Accepted so editors can find the schema; stepflux needs nothing from it.
    pub schema: Option<String>,
    /// Study name, also its output folder: letters, digits, '-', '_' and '.', not
    /// starting with '.', at most 48 characters. Case `c0001` runs as `<name>-c0001`.
    pub name: String,
    /// Free text for reports.
    #[serde(default)]
    pub description: String,
    /// The scenario every case starts from: a path relative to the study file, or the
    /// scenario object itself (its `name` is replaced by the case name).
    pub base: Base,
    /// Short parameter names (used in the result tables) and the dotted JSON path each
    /// one sets in the scenario, e.g. `"vin": "converter.input.voltage"`,
    /// `"step": "disturbances[0].load_current.to"`.
    pub parameters: BTreeMap<String, String>,
    /// Named lists of values; every combination is a case (names taken in alphabetical
    /// order, the last varying fastest).
    #[serde(default)]
    pub corners: BTreeMap<String, Vec<StudyValue>>,
    /// Ranges; the parameters inside one sweep move together, different sweeps (and
    /// the corners) combine as a Cartesian product.
    #[serde(default)]
    pub sweeps: Vec<Sweep>,
    /// Random tolerances applied to every corner and sweep combination.
    #[serde(default)]
    pub monte_carlo: Option<MonteCarlo>,
    /// Spec limits replacing or adding to the base scenario's `limits`, key by key
    /// (same fields and units as a scenario's limits).
    #[serde(default)]
    #[schemars(with = "Option<crate::scenario::raw::Limits>")]
    pub limits: Option<serde_json::Map<String, Value>>,
}

/// Where the base scenario comes from.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(untagged)]
pub enum Base {
    /// Path of a scenario file, relative to the study file.
    File(String),
    /// The scenario itself.
    Inline(#[schemars(with = "crate::scenario::raw::Scenario")] Box<Value>),
}

/// A range of one or more parameters.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Sweep {
    /// Number of points, start and stop included (1: the start only).
    pub points: usize,
    /// Spacing of the points (default linear).
    #[serde(default)]
    pub scale: Scale,
    /// Start and stop of each parameter moved by this sweep.
    pub ranges: BTreeMap<String, Range>,
}

/// Spacing of sweep points.
#[derive(Clone, Copy, Debug, Default, Deserialize, JsonSchema, PartialEq)]
#[serde(rename_all = "snake_case")]
pub enum Scale {
    /// Equal steps.
    #[default]
    Linear,
    /// Equal ratios (start and stop of the same sign, neither zero).
    Log,
}

/// Start and stop of a swept parameter.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Range {
    /// First value.
    pub start: StudyValue,
    /// Last value.
    pub stop: StudyValue,
}

/// Monte Carlo sampling of component tolerances.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct MonteCarlo {
    /// Samples per corner and sweep combination. Sample k draws the same deviations at
    /// every combination: it stands for one built unit tested at every corner.
    pub samples: usize,
    /// Seed of the random streams; the same seed gives the same samples.
    pub seed: u64,
    /// Tolerance of each parameter, relative to its nominal value (the corner or sweep
    /// value if it has one, else the base scenario's).
    pub tolerances: BTreeMap<String, Tolerance>,
}

/// A relative tolerance.
#[derive(Clone, Copy, Debug, Deserialize, JsonSchema, PartialEq)]
#[serde(rename_all = "snake_case")]
pub enum Tolerance {
    /// Uniform within ± this percentage of the nominal value.
    UniformPercent(f64),
    /// Normal with this standard deviation, in percent of the nominal value.
    NormalPercent(f64),
}

/// One named parameter, ready to set.
#[derive(Clone, Debug)]
pub struct Parameter {
    /// Name used in the tables.
    pub name: String,
    /// Where it goes in the scenario.
    pub path: JsonPath,
    /// The path as written.
    pub path_text: String,
}

/// One axis of the case grid: a corner (one parameter) or a sweep (several moving
/// together). `values[p]` holds the points of parameter index `p`.
#[derive(Clone, Debug)]
pub struct Axis {
    /// Number of points.
    pub len: usize,
    /// (parameter index, its value at each point).
    pub values: Vec<(usize, Vec<f64>)>,
}

/// Monte Carlo settings resolved to parameter indices.
#[derive(Clone, Debug)]
pub struct Sampling {
    /// Samples per grid point.
    pub samples: usize,
    /// Seed.
    pub seed: u64,
    /// (parameter index, tolerance), in parameter-name order.
    pub tolerances: Vec<(usize, Tolerance)>,
}

/// A study ready to expand.
#[derive(Clone, Debug)]
pub struct Study {
    /// Name.
    pub name: String,
    /// Free text.
    pub description: String,
    /// The study file, for messages.
    pub file: String,
    /// Base scenario with the study's limits merged in.
    pub base: Value,
    /// Parameters, in name order.
    pub parameters: Vec<Parameter>,
    /// Nominal value of each parameter in the base (None when the base leaves it out).
    pub nominal: Vec<Option<f64>>,
    /// Grid axes: corners in name order, then sweeps in file order.
    pub axes: Vec<Axis>,
    /// Monte Carlo, if any.
    pub sampling: Option<Sampling>,
}

/// Reads and checks the study file at `path`.
pub fn load(path: &Path) -> Result<Study> {
    let bytes = std::fs::read(path).with_context(|| format!("reading study {}", path.display()))?;
    let file = path.display().to_string();
    let text = document::decode(bytes, &file)?;
    load_text(&text, path.parent().unwrap_or(Path::new(".")), &file)
}

/// Checks study `text`; `dir` is where a base file path is relative to, `file` names
/// the study in messages.
pub fn load_text(text: &str, dir: &Path, file: &str) -> Result<Study> {
    let schema = || serde_json::to_value(schemars::schema_for!(StudyFile)).unwrap_or_default();
    let raw: StudyFile = document::parse(text, file, "study", schema)?;
    resolve(raw, dir, file)
}

/// Checks a parsed study; `dir` is where a base file path is relative to.
pub fn resolve(raw: StudyFile, dir: &Path, file: &str) -> Result<Study> {
    check_name(&raw.name)?;
    let mut base = read_base(&raw.base, dir)?;
    merge_limits(&mut base, raw.limits.as_ref())?;
    let parameters = parameters(&raw.parameters)?;
    let nominal = nominals(&base, &parameters)?;
    let index = |name: &str, what: &str| -> Result<usize> {
        parameters
            .iter()
            .position(|p| p.name == name)
            .ok_or_else(|| anyhow!("{what} names '{name}', which is not in `parameters`"))
    };
    let mut axes = Vec::new();
    for (name, list) in &raw.corners {
        axes.push(corner(index(name, "corners")?, name, list)?);
    }
    for (k, sweep) in raw.sweeps.iter().enumerate() {
        axes.push(sweep_axis(sweep, k, &index)?);
    }
    let sampling = match &raw.monte_carlo {
        Some(mc) => Some(sampling(mc, &index)?),
        None => None,
    };
    let study = Study {
        name: raw.name,
        description: raw.description,
        file: file.to_string(),
        base,
        parameters,
        nominal,
        axes,
        sampling,
    };
    check_coverage(&study)?;
    check_units(&study, &raw.corners, &raw.sweeps)?;
    Ok(study)
}

fn check_name(name: &str) -> Result<()> {
    let ok_chars = name
        .chars()
        .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'));
    if name.is_empty() || name.len() > NAME_MAX || name.starts_with('.') || !ok_chars {
        bail!(
            "study name {name:?} must be 1 to {NAME_MAX} letters, digits, '-', '_' or '.', \
             not starting with '.'"
        );
    }
    Ok(())
}

fn read_base(base: &Base, dir: &Path) -> Result<Value> {
    let value = match base {
        Base::Inline(v) => (**v).clone(),
        Base::File(rel) => {
            let path: PathBuf = dir.join(rel);
            let text = std::fs::read_to_string(&path)
                .with_context(|| format!("reading base scenario {}", path.display()))?;
            serde_json::from_str(&text)
                .with_context(|| format!("base scenario {} is not JSON", path.display()))?
        }
    };
    if !value.is_object() {
        bail!("the base scenario must be a JSON object");
    }
    Ok(value)
}

fn merge_limits(base: &mut Value, limits: Option<&serde_json::Map<String, Value>>) -> Result<()> {
    let Some(extra) = limits else {
        return Ok(());
    };
    let obj = base
        .as_object_mut()
        .ok_or_else(|| anyhow!("the base scenario must be a JSON object"))?;
    let target = obj
        .entry("limits")
        .or_insert_with(|| Value::Object(Default::default()));
    let map = target
        .as_object_mut()
        .ok_or_else(|| anyhow!("the base scenario's `limits` is not an object"))?;
    for (k, v) in extra {
        // A limit under its old name replaces the same limit under its new one, and back.
        map.retain(|key, _| !crate::scenario::same_limit(key, k));
        map.insert(k.clone(), v.clone());
    }
    Ok(())
}

fn parameters(raw: &BTreeMap<String, String>) -> Result<Vec<Parameter>> {
    if raw.is_empty() {
        bail!("`parameters` is empty: name at least one value to vary");
    }
    raw.iter()
        .map(|(name, path)| {
            let ok = !name.is_empty()
                && name
                    .chars()
                    .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'));
            if !ok {
                bail!("parameter name {name:?} may hold only letters, digits, '-', '_' and '.'");
            }
            let parsed = JsonPath::parse(path).with_context(|| format!("parameter '{name}'"))?;
            Ok(Parameter {
                name: name.clone(),
                path: parsed,
                path_text: path.clone(),
            })
        })
        .collect()
}

/// The base value at each path, checking that the path can be set.
fn nominals(base: &Value, parameters: &[Parameter]) -> Result<Vec<Option<f64>>> {
    parameters
        .iter()
        .map(|p| {
            p.path
                .check_settable(base)
                .with_context(|| format!("parameter '{}' ({})", p.name, p.path_text))?;
            match p.path.get(base) {
                None => Ok(None),
                Some(v) => StudyValue::from_json(v)
                    .and_then(|s| s.si())
                    .map(Some)
                    .with_context(|| {
                        format!(
                            "parameter '{}': the base value at {} is not a number",
                            p.name, p.path_text
                        )
                    }),
            }
        })
        .collect()
}

fn corner(param: usize, name: &str, list: &[StudyValue]) -> Result<Axis> {
    if list.is_empty() {
        bail!("corner '{name}' has no values");
    }
    let values = list
        .iter()
        .map(|v| v.si())
        .collect::<Result<Vec<_>>>()
        .with_context(|| format!("corner '{name}'"))?;
    Ok(Axis {
        len: values.len(),
        values: vec![(param, values)],
    })
}

fn sweep_axis(
    sweep: &Sweep,
    k: usize,
    index: &dyn Fn(&str, &str) -> Result<usize>,
) -> Result<Axis> {
    if sweep.points == 0 || sweep.ranges.is_empty() {
        bail!("sweep {k}: needs at least one point and one range");
    }
    let mut values = Vec::new();
    for (name, range) in &sweep.ranges {
        let param = index(name, &format!("sweep {k}"))?;
        let (start, stop) = (range.start.si()?, range.stop.si()?);
        let points = sweep_points(start, stop, sweep.points, sweep.scale)
            .with_context(|| format!("sweep {k}, '{name}'"))?;
        values.push((param, points));
    }
    Ok(Axis {
        len: sweep.points,
        values,
    })
}

/// `points` values from `start` to `stop`, both exact.
pub fn sweep_points(start: f64, stop: f64, points: usize, scale: Scale) -> Result<Vec<f64>> {
    if scale == Scale::Log && (start * stop <= 0.0) {
        bail!("a log sweep needs start and stop of the same sign, neither zero");
    }
    let last = points.saturating_sub(1).max(1) as f64;
    Ok((0..points)
        .map(|k| {
            let x = k as f64 / last;
            match (k, scale) {
                (0, _) => start,
                (k, _) if k + 1 == points => stop,
                (_, Scale::Linear) => start + (stop - start) * x,
                (_, Scale::Log) => start * (stop / start).powf(x),
            }
        })
        .collect())
}

fn sampling(mc: &MonteCarlo, index: &dyn Fn(&str, &str) -> Result<usize>) -> Result<Sampling> {
    if mc.samples == 0 || mc.tolerances.is_empty() {
        bail!("monte_carlo: needs at least one sample and one tolerance");
    }
    let mut tolerances = Vec::new();
    for (name, tol) in &mc.tolerances {
        let pct = match tol {
            Tolerance::UniformPercent(p) | Tolerance::NormalPercent(p) => *p,
        };
        if !(pct.is_finite() && (0.0..100.0).contains(&pct)) {
            bail!("monte_carlo tolerance of '{name}' must be 0 to below 100 %");
        }
        tolerances.push((index(name, "monte_carlo")?, *tol));
    }
    Ok(Sampling {
        samples: mc.samples,
        seed: mc.seed,
        tolerances,
    })
}

/// Every parameter is set by exactly one corner or sweep, or only by the Monte Carlo
/// around its base value.
fn check_coverage(study: &Study) -> Result<()> {
    for (k, p) in study.parameters.iter().enumerate() {
        let on_axes = study
            .axes
            .iter()
            .flat_map(|a| &a.values)
            .filter(|(i, _)| *i == k)
            .count();
        let sampled = study
            .sampling
            .as_ref()
            .is_some_and(|s| s.tolerances.iter().any(|(i, _)| *i == k));
        if on_axes > 1 {
            bail!(
                "parameter '{}' is set by more than one corner or sweep",
                p.name
            );
        }
        if on_axes == 0 && !sampled {
            bail!(
                "parameter '{}' is not used by any corner, sweep or tolerance",
                p.name
            );
        }
        if on_axes == 0 && study.nominal[k].is_none() {
            bail!(
                "parameter '{}': the base has no value at {} to apply a tolerance to",
                p.name,
                p.path_text
            );
        }
    }
    Ok(())
}

/// A value written with a unit must be in the unit of the base value it replaces, so
/// "100 uH" cannot silently become a capacitance.
fn check_units(
    study: &Study,
    corners: &BTreeMap<String, Vec<StudyValue>>,
    sweeps: &[Sweep],
) -> Result<()> {
    let given = corners
        .iter()
        .flat_map(|(n, l)| l.iter().map(move |v| (n, v)));
    let swept = sweeps.iter().flat_map(|s| {
        s.ranges
            .iter()
            .flat_map(|(n, r)| [(n, &r.start), (n, &r.stop)])
    });
    for (name, value) in given.chain(swept) {
        let Some(p) = study.parameters.iter().find(|p| &p.name == name) else {
            continue;
        };
        if let Some(base) = p.path.get(&study.base).and_then(Value::as_str) {
            if let StudyValue::Text(text) = value {
                if !compatible_units(text, base) {
                    bail!(
                        "'{name}': {text:?} is not in the unit of the base value {base:?} at {}",
                        p.path_text
                    );
                }
            }
        }
    }
    Ok(())
}

impl Study {
    /// Number of cases: grid points times samples, refused past [`MAX_CASES`].
    pub fn case_count(&self) -> Result<usize> {
        let samples = self.sampling.as_ref().map_or(1, |s| s.samples);
        self.axes
            .iter()
            .try_fold(samples, |n, a| n.checked_mul(a.len))
            .filter(|&n| n <= MAX_CASES)
            .ok_or_else(|| anyhow!("the study expands to more than {MAX_CASES} cases"))
    }
}
