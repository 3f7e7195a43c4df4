//! Frequency responses of the sampled-data model and of the averaged model, and the
//! crossover and margins read off any loop gain the same way.

use nalgebra::{Complex, DMatrix, DVector};

use super::{Disturbed, InputColumn, SampledModel};
use crate::averaged::{AveragedModel, Input, Output, StateSpace};
use crate::error::ModelError;

const TAU: f64 = 2.0 * std::f64::consts::PI;

type C64 = Complex<f64>;

/// Loop gain and control-to-output at one frequency.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BodePoint {
    /// Hertz.
    pub frequency: f64,
    /// Loop gain T.
    pub loop_gain: C64,
    /// Output voltage per volt at the modulator's control input.
    pub control_to_output: C64,
    /// Closed-loop output impedance −v̂ₒ/î_load, ohms.
    pub output_impedance: C64,
    /// Closed-loop line-to-output v̂ₒ/v̂_in, volts per volt.
    pub line_to_output: C64,
}

/// A response of one model on a frequency grid.
pub type Bode = Vec<BodePoint>;

impl SampledModel {
    /// (zI − Φ)⁻¹γ at z = e^{jωT_s}, and z.
    fn resolvent(
        &self,
        frequency: f64,
        gamma: &DVector<f64>,
    ) -> Result<(C64, DVector<C64>), ModelError> {
        let n = self.phi.nrows();
        let z = C64::from_polar(1.0, TAU * frequency * self.period);
        let m = DMatrix::from_fn(n, n, |i, j| {
            let a = C64::new(-self.phi[(i, j)], 0.0);
            if i == j {
                a + z
            } else {
                a
            }
        });
        let g = DVector::from_fn(n, |i, _| C64::new(gamma[i], 0.0));
        let w = m.lu().solve(&g).ok_or_else(|| {
            ModelError::Infeasible(format!(
                "sampled-data model: a Floquet multiplier sits on the unit circle at {frequency} Hz"
            ))
        })?;
        Ok((z, w))
    }

    /// Closed-loop output per unit of `input` ([`super::inputs`]): the output's mean over
    /// the period, referred to its middle, the held input to [`Disturbed::reference`].
    fn input_response(&self, frequency: f64, input: Disturbed) -> Result<C64, ModelError> {
        let col: &InputColumn = match input {
            Disturbed::LoadCurrent => &self.load,
            Disturbed::Line => &self.line,
        };
        let (_, w) = self.resolvent(frequency, &col.gamma)?;
        let h = (0..w.len()).fold(C64::new(col.mean, 0.0), |s, i| s + w[i] * self.mean_x[i]);
        let shift = (input.reference(self.duty) - 0.5) * self.period;
        Ok(h * C64::from_polar(1.0, TAU * frequency * shift))
    }

    /// T and v̂ₒ/v̂ₘ at `frequency` (see the module doc of [`super`]).
    pub fn at(&self, frequency: f64) -> Result<BodePoint, ModelError> {
        let (z, w) = self.resolvent(frequency, &self.gamma)?;
        let dot =
            |row: &DVector<f64>| (0..row.len()).fold(C64::new(0.0, 0.0), |s, i| s + w[i] * row[i]);
        let h_d = dot(&self.duty_x) + self.duty_u;
        let h_o = (dot(&self.out_x) + self.out_u) / z;
        let turn_off = C64::from_polar(1.0, TAU * frequency * self.duty * self.period);
        Ok(BodePoint {
            frequency,
            loop_gain: self.duty_u / h_d - 1.0,
            control_to_output: h_o * self.duty_u / h_d * turn_off,
            output_impedance: -self.input_response(frequency, Disturbed::LoadCurrent)?,
            line_to_output: self.input_response(frequency, Disturbed::Line)?,
        })
    }

    /// [`SampledModel::at`] on every frequency of `grid`.
    pub fn bode(&self, grid: &[f64]) -> Result<Bode, ModelError> {
        grid.iter().map(|&f| self.at(f)).collect()
    }
}

impl AveragedModel {
    /// Output voltage per volt at the modulator's control input, −(m/V_m)·G_vd(s), the
    /// loop opened at the same place as [`AveragedModel::loop_gain`].
    pub fn control_to_output(&self, frequency: f64) -> Result<C64, ModelError> {
        let ol = &self.open_loop;
        let n = ol.a.nrows();
        let duty = ol.b.ncols() - 1;
        let s = C64::new(0.0, TAU * frequency);
        let m = DMatrix::from_fn(n, n, |i, j| {
            let a = C64::new(-ol.a[(i, j)], 0.0);
            if i == j {
                a + s
            } else {
                a
            }
        });
        let b = DVector::from_fn(n, |i, _| C64::new(ol.b[(i, duty)], 0.0));
        let x = m.lu().solve(&b).ok_or_else(|| {
            ModelError::Infeasible(format!("averaged model: a pole sits at {frequency} Hz"))
        })?;
        let vo = Output::OutputVoltage as usize;
        let g = (0..n).fold(C64::new(ol.d[(vo, duty)], 0.0), |g, i| {
            g + x[i] * ol.c[(vo, i)]
        });
        Ok(-g * self.modulator_gain())
    }

    /// Closed-loop output impedance −v̂ₒ/î_load, ohms.
    pub fn output_impedance(&self, frequency: f64) -> Result<C64, ModelError> {
        let vo = Output::OutputVoltage as usize;
        Ok(-self
            .closed_loop
            .response(Input::LoadCurrent as usize, vo, frequency)?)
    }

    /// Output impedance with the duty held (the loop open), ohms: the power stage's
    /// own, which the loop divides by 1 + T (Erickson & Maksimović, 2nd ed., §9.3).
    pub fn open_loop_output_impedance(&self, frequency: f64) -> Result<C64, ModelError> {
        let vo = Output::OutputVoltage as usize;
        Ok(-self
            .open_loop
            .response(Input::LoadCurrent as usize, vo, frequency)?)
    }

    /// Closed-loop line-to-output v̂ₒ/v̂_in, volts per volt.
    pub fn line_to_output(&self, frequency: f64) -> Result<C64, ModelError> {
        let vo = Output::OutputVoltage as usize;
        self.closed_loop
            .response(Input::Line as usize, vo, frequency)
    }

    /// Loop gain, control-to-output, output impedance and line-to-output on every
    /// frequency of `grid`.
    pub fn bode(&self, grid: &[f64]) -> Result<Bode, ModelError> {
        grid.iter()
            .map(|&f| {
                Ok(BodePoint {
                    frequency: f,
                    loop_gain: self.loop_gain(f)?,
                    control_to_output: self.control_to_output(f)?,
                    output_impedance: self.output_impedance(f)?,
                    line_to_output: self.line_to_output(f)?,
                })
            })
            .collect()
    }
}

impl StateSpace {
    /// Output row `output` per unit of input column `input` at s = j2πf:
    /// C(sI − A)⁻¹B + D.
    pub fn response(&self, input: usize, output: usize, frequency: f64) -> Result<C64, ModelError> {
        let n = self.a.nrows();
        let s = C64::new(0.0, TAU * frequency);
        let m = DMatrix::from_fn(n, n, |i, j| {
            let a = C64::new(-self.a[(i, j)], 0.0);
            if i == j {
                a + s
            } else {
                a
            }
        });
        let b = DVector::from_fn(n, |i, _| C64::new(self.b[(i, input)], 0.0));
        let x = m.lu().solve(&b).ok_or_else(|| {
            ModelError::Infeasible(format!("averaged model: a pole sits at {frequency} Hz"))
        })?;
        Ok((0..n).fold(C64::new(self.d[(output, input)], 0.0), |g, i| {
            g + x[i] * self.c[(output, i)]
        }))
    }
}

/// Crossover and margins of a loop gain.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Margins {
    /// Where |T| first falls through 1, hertz (None: it does not in the range).
    pub crossover: Option<f64>,
    /// 180° plus the unwrapped phase of T at crossover, degrees.
    pub phase_margin: Option<f64>,
    /// Where the unwrapped phase first falls through −180°, hertz.
    pub phase_crossover: Option<f64>,
    /// −20·log₁₀|T| there, dB.
    pub gain_margin: Option<f64>,
}

/// Points per decade of the search grid; each crossing is then bisected.
const PER_DECADE: f64 = 200.0;

/// A phase this close above −180° counts as reaching it: at fs/2 the sampled-data loop
/// gain is real by construction (z = −1 in real matrices), so its phase is −180° but
/// for rounding, which may fall on either side (it moved when the shooting maps
/// dropped their energy meters).
const PHASE_ROUNDING: f64 = 1e-9;

/// An angle brought into (−π, π].
fn wrap(a: f64) -> f64 {
    let w = a.rem_euclid(TAU);
    if w > std::f64::consts::PI {
        w - TAU
    } else {
        w
    }
}

/// Crossover and margins of `t` between `lo` and `hi` hertz: a log grid of
/// [`PER_DECADE`] points per decade, the phase unwrapped from `lo` (where it is taken in
/// (−180°, 180°]), each crossing bisected in log frequency to 1e-9 of a decade.
pub fn margins(
    lo: f64,
    hi: f64,
    t: impl Fn(f64) -> Result<C64, ModelError>,
) -> Result<Margins, ModelError> {
    let steps = ((hi / lo).log10() * PER_DECADE).ceil().max(1.0) as usize;
    let freq = |k: f64| lo * (hi / lo).powf(k / steps as f64);
    let mut out = Margins {
        crossover: None,
        phase_margin: None,
        phase_crossover: None,
        gain_margin: None,
    };
    let mut prev = t(lo)?;
    let mut phase = prev.arg();
    for k in 1..=steps {
        let here = t(freq(k as f64))?;
        let next_phase = phase + wrap(here.arg() - prev.arg());
        if out.crossover.is_none() && prev.norm() >= 1.0 && here.norm() < 1.0 {
            let f = bisect(k, &freq, |f| Ok(t(f)?.norm() >= 1.0))?;
            let p = phase + wrap(t(f)?.arg() - prev.arg());
            out.crossover = Some(f);
            out.phase_margin = Some(180.0 + p.to_degrees());
        }
        if out.phase_crossover.is_none()
            && phase > -std::f64::consts::PI
            && next_phase <= -std::f64::consts::PI + PHASE_ROUNDING
        {
            let f = bisect(k, &freq, |f| {
                Ok(phase + wrap(t(f)?.arg() - prev.arg()) > -std::f64::consts::PI + PHASE_ROUNDING)
            })?;
            out.phase_crossover = Some(f);
            out.gain_margin = Some(-20.0 * t(f)?.norm().log10());
        }
        phase = next_phase;
        prev = here;
    }
    Ok(out)
}

/// The frequency between grid points k − 1 and k where `above` turns false.
fn bisect(
    k: usize,
    freq: &impl Fn(f64) -> f64,
    above: impl Fn(f64) -> Result<bool, ModelError>,
) -> Result<f64, ModelError> {
    let (mut a, mut b) = ((k - 1) as f64, k as f64);
    for _ in 0..40 {
        let mid = 0.5 * (a + b);
        if above(freq(mid))? {
            a = mid;
        } else {
            b = mid;
        }
    }
    Ok(freq(0.5 * (a + b)))
}

/// Where the closed-loop output impedance of `m` is largest between `lo` and `hi`
/// hertz, and its magnitude there, ohms: the largest of a log grid of [`PER_DECADE`]
/// points per decade (a resonant peak of quality factor Q is 1/(2Q) of a decade wide at
/// −3 dB, so the grid's 0.5 % steps read it within 0.01 dB for Q below 10).
pub fn peak_output_impedance(m: &SampledModel, lo: f64, hi: f64) -> Result<(f64, f64), ModelError> {
    let steps = ((hi / lo).log10() * PER_DECADE).ceil().max(1.0) as usize;
    let mut best = (lo, 0.0);
    for k in 0..=steps {
        let f = lo * (hi / lo).powf(k as f64 / steps as f64);
        let z = m.at(f)?.output_impedance.norm();
        if z > best.1 {
            best = (f, z);
        }
    }
    Ok(best)
}

/// `n` frequencies spaced evenly in log from `lo` to `hi` hertz.
pub fn log_grid(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    match n {
        0 => Vec::new(),
        1 => vec![lo],
        _ => (0..n)
            .map(|k| lo * (hi / lo).powf(k as f64 / (n - 1) as f64))
            .collect(),
    }
}

/// Crossover and margins of a loop gain known only on `points` (frequency ascending,
/// hertz, with T), as for the injected response: |T| in dB and the phase (unwrapped
/// from the first point) interpolated linearly in log frequency between the two
/// points that bracket each crossing; a last point at −180° (within 0.5°) is taken
/// as the phase crossover.
pub fn margins_on_grid(points: &[(f64, C64)]) -> Margins {
    let mut out = Margins {
        crossover: None,
        phase_margin: None,
        phase_crossover: None,
        gain_margin: None,
    };
    let mut phase: Vec<f64> = Vec::with_capacity(points.len());
    for (k, (_, t)) in points.iter().enumerate() {
        let p = match k {
            0 => t.arg(),
            _ => phase[k - 1] + wrap(t.arg() - points[k - 1].1.arg()),
        };
        phase.push(p);
    }
    let db: Vec<f64> = points
        .iter()
        .map(|(_, t)| 20.0 * t.norm().log10())
        .collect();
    let lf: Vec<f64> = points.iter().map(|(f, _)| f.log10()).collect();
    let at = |k: usize, s: f64, v: &[f64]| v[k - 1] + s * (v[k] - v[k - 1]);
    let freq = |k: usize, s: f64| 10f64.powf(at(k, s, &lf));
    let pi = std::f64::consts::PI;
    for k in 1..points.len() {
        if out.crossover.is_none() && db[k - 1] >= 0.0 && db[k] < 0.0 {
            let s = db[k - 1] / (db[k - 1] - db[k]);
            out.crossover = Some(freq(k, s));
            out.phase_margin = Some(180.0 + at(k, s, &phase).to_degrees());
        }
        if out.phase_crossover.is_none() && phase[k - 1] > -pi && phase[k] <= -pi {
            let s = (phase[k - 1] + pi) / (phase[k - 1] - phase[k]);
            out.phase_crossover = Some(freq(k, s));
            out.gain_margin = Some(-at(k, s, &db));
        }
    }
    // A sampled-data loop gain is real at fs/2: a last point whose phase is −180° to
    // within the extraction's error (0.5°) is the phase crossover.
    let last = points.len().wrapping_sub(1);
    if out.phase_crossover.is_none()
        && !points.is_empty()
        && (phase[last] + pi).abs() <= 0.5f64.to_radians()
    {
        out.phase_crossover = Some(points[last].0);
        out.gain_margin = Some(-db[last]);
    }
    out
}
