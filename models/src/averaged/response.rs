//! What the averaged model answers: the loop gain at a frequency, crossover and phase
//! margin, exact step responses, and the transient figures (peak deviation, recovery
//! into a band) measured the same way on any waveform.

use nalgebra::{Complex, DMatrix, DVector};

use super::{AveragedModel, Input, Output, INPUTS, OUTPUTS};
use crate::error::ModelError;

const TAU: f64 = 2.0 * std::f64::consts::PI;

/// Where the loop gain crosses unity.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Crossover {
    /// Crossover frequency, hertz.
    pub frequency: f64,
    /// Phase margin, degrees: 180° plus the phase of T there, unwrapped from DC.
    pub phase_margin: f64,
}

/// A response sampled in time: absolute values of every [`Output`].
#[derive(Clone, Debug, PartialEq)]
pub struct Response {
    /// Seconds from the start of the disturbance.
    pub time: Vec<f64>,
    /// One row per sample, in [`Output`] order (volts, amperes, volts, duty).
    pub values: Vec<[f64; OUTPUTS]>,
}

impl Response {
    /// The samples of one output.
    pub fn output(&self, output: Output) -> Vec<f64> {
        self.values.iter().map(|v| v[output as usize]).collect()
    }
}

/// Transient figures of a waveform after a disturbance.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Transient {
    /// Largest departure from the initial value, signed, in the waveform's unit.
    pub peak_deviation: f64,
    /// When it occurs, seconds after the disturbance.
    pub peak_time: f64,
    /// When the waveform last enters the band around its final value, seconds after
    /// the disturbance (0 if it never leaves; `None` if it ends outside).
    pub recovery_time: Option<f64>,
}

impl AveragedModel {
    /// Loop gain T(j2πf) with the loop opened at the modulator input:
    /// T = (m/Vm)·v̂c/d̂, positive real at DC (Erickson & Maksimović, 2nd ed., §9.1).
    pub fn loop_gain(&self, frequency: f64) -> Result<Complex<f64>, ModelError> {
        let ol = &self.open_loop;
        let n = ol.a.nrows();
        let s = Complex::new(0.0, TAU * frequency);
        let m = DMatrix::from_fn(n, n, |i, j| {
            let a = Complex::new(-ol.a[(i, j)], 0.0);
            if i == j {
                a + s
            } else {
                a
            }
        });
        let b = DVector::from_fn(n, |i, _| Complex::new(ol.b[(i, INPUTS)], 0.0));
        let x = m.lu().solve(&b).ok_or_else(|| {
            ModelError::Infeasible(format!("averaged model: a pole sits at {frequency} Hz"))
        })?;
        let vc = Output::ControlVoltage as usize;
        let g = (0..n).fold(Complex::new(ol.d[(vc, INPUTS)], 0.0), |g, i| {
            g + x[i] * ol.c[(vc, i)]
        });
        Ok(g * self.modulator_gain)
    }

    /// First frequency between 1 Hz and half the switching frequency where |T| falls
    /// through 1, and the phase margin there.
    pub fn crossover(&self) -> Result<Crossover, ModelError> {
        const PER_DECADE: usize = 100;
        let (lo, hi) = (1.0_f64, 0.5 / self.parameters.period);
        let steps = ((hi / lo).log10() * PER_DECADE as f64).ceil() as usize;
        let freq = |k: f64| lo * (hi / lo).powf(k / steps as f64);
        let mut prev = self.loop_gain(lo)?;
        let mut phase = prev.arg();
        if prev.norm() < 1.0 {
            return Err(ModelError::Infeasible(
                "averaged model: loop gain is below 1 already at 1 Hz".into(),
            ));
        }
        for k in 1..=steps {
            let t = self.loop_gain(freq(k as f64))?;
            if t.norm() < 1.0 {
                // Bisect in log frequency between the last two grid points.
                let (mut a, mut b) = ((k - 1) as f64, k as f64);
                for _ in 0..60 {
                    let mid = 0.5 * (a + b);
                    if self.loop_gain(freq(mid))?.norm() >= 1.0 {
                        a = mid;
                    } else {
                        b = mid;
                    }
                }
                let f = freq(0.5 * (a + b));
                let tc = self.loop_gain(f)?;
                phase += wrap(tc.arg() - prev.arg());
                return Ok(Crossover {
                    frequency: f,
                    phase_margin: 180.0 + phase.to_degrees(),
                });
            }
            phase += wrap(t.arg() - prev.arg());
            prev = t;
        }
        Err(ModelError::Infeasible(
            "averaged model: loop gain stays above 1 up to half the switching frequency".into(),
        ))
    }

    /// Closed-loop response to `input` moving by `change` (SI units) at t = 0, as a
    /// step (`slew` = 0) or a ramp at `slew` units per second, sampled every `dt`
    /// seconds up to `duration`. Exact for the linear model: each step multiplies by
    /// exp(M·h) of the state augmented with the input and its slope (Van Loan, IEEE
    /// TAC 23(3), 1978).
    pub fn step_response(
        &self,
        input: Input,
        change: f64,
        slew: f64,
        duration: f64,
        dt: f64,
    ) -> Result<Response, ModelError> {
        let bad = |what: &str, v: f64| ModelError::OutOfRange {
            field: format!("averaged.step_response.{what}"),
            value: v,
            allowed: "a finite value > 0 (slew ≥ 0; at most 10⁷ samples)".into(),
        };
        if !(dt.is_finite() && dt > 0.0) {
            return Err(bad("dt", dt));
        }
        if !(duration.is_finite() && duration > 0.0 && duration / dt <= 1e7) {
            return Err(bad("duration", duration));
        }
        if !(slew.is_finite() && slew >= 0.0 && change.is_finite()) {
            return Err(bad("slew", slew));
        }
        let cl = &self.closed_loop;
        let (nx, j) = (cl.a.nrows(), input as usize);
        let mut m = DMatrix::zeros(nx + 2, nx + 2);
        m.view_mut((0, 0), (nx, nx)).copy_from(&cl.a);
        m.view_mut((0, nx), (nx, 1)).copy_from(&cl.b.column(j));
        m[(nx, nx + 1)] = 1.0;
        let phi = |h: f64| (&m * h).exp();
        let step = phi(dt);
        let mut z = DVector::zeros(nx + 2);
        let mut ramp_end = None;
        if slew == 0.0 || change == 0.0 {
            z[nx] = change;
        } else {
            z[nx + 1] = change.signum() * slew;
            ramp_end = Some(change.abs() / slew);
        }
        let n = (duration / dt).round() as usize;
        let mut out = Response {
            time: Vec::with_capacity(n + 1),
            values: Vec::with_capacity(n + 1),
        };
        self.record(&mut out, 0.0, &z, j);
        for k in 1..=n {
            let (t0, t1) = ((k - 1) as f64 * dt, k as f64 * dt);
            z = match ramp_end {
                Some(te) if te <= t1 => {
                    let mut mid = phi(te - t0) * &z;
                    mid[nx] = change;
                    mid[nx + 1] = 0.0;
                    ramp_end = None;
                    phi(t1 - te) * mid
                }
                _ => &step * &z,
            };
            self.record(&mut out, t1, &z, j);
        }
        Ok(out)
    }

    /// Output voltage after a load-current change of `change` amperes at `slew` A/s
    /// (0 = step): see [`AveragedModel::step_response`].
    pub fn load_step(
        &self,
        change: f64,
        slew: f64,
        duration: f64,
        dt: f64,
    ) -> Result<Response, ModelError> {
        self.step_response(Input::LoadCurrent, change, slew, duration, dt)
    }

    fn record(&self, out: &mut Response, t: f64, z: &DVector<f64>, input: usize) {
        let cl = &self.closed_loop;
        let nx = cl.a.nrows();
        let y = &cl.c * z.rows(0, nx) + cl.d.column(input) * z[nx];
        let mut row = [0.0; OUTPUTS];
        for (r, v) in row.iter_mut().enumerate() {
            *v = self.equilibrium_outputs[r] + y[r];
        }
        out.time.push(t);
        out.values.push(row);
    }
}

/// An angle brought into (−π, π].
fn wrap(a: f64) -> f64 {
    let w = a.rem_euclid(TAU);
    if w > std::f64::consts::PI {
        w - TAU
    } else {
        w
    }
}

/// Peak deviation from `initial` and recovery into `final_value` ± `band` of samples
/// (`time` ascending) after a disturbance at `t_step`. Recovery is interpolated
/// linearly between the last sample outside the band and the next.
pub fn transient(
    time: &[f64],
    value: &[f64],
    t_step: f64,
    initial: f64,
    final_value: f64,
    band: f64,
) -> Transient {
    let after = || time.iter().zip(value).filter(|(t, _)| **t >= t_step);
    let (peak_time, peak_deviation) =
        after()
            .map(|(t, v)| (*t - t_step, v - initial))
            .fold((0.0_f64, 0.0_f64), |best, x| {
                if x.1.abs() > best.1.abs() {
                    x
                } else {
                    best
                }
            });
    let last_out = (0..time.len())
        .rev()
        .take_while(|&i| time[i] >= t_step)
        .find(|&i| (value[i] - final_value).abs() > band);
    let recovery_time = match last_out {
        None => Some(0.0),
        Some(i) if i + 1 >= time.len() => None,
        Some(i) => {
            let (e0, e1) = (value[i] - final_value, value[i + 1] - final_value);
            let theta = if e1 == e0 {
                1.0
            } else {
                ((e0.signum() * band - e0) / (e1 - e0)).clamp(0.0, 1.0)
            };
            Some(time[i] + theta * (time[i + 1] - time[i]) - t_step)
        }
    };
    Transient {
        peak_deviation,
        peak_time,
        recovery_time,
    }
}

/// Centred one-period moving average ⟨x⟩(t) = (1/T)∫ x over [t − T/2, t + T/2] of
/// samples (`time` non-decreasing, event samples included), integrating their linear
/// interpolant; evaluated at every sample whose window fits. This is the averaging
/// operator of Erickson & Maksimović, 2nd ed., §7.1, centred so that it does not delay.
/// Returns (times, averages).
pub fn period_average(time: &[f64], value: &[f64], period: f64) -> (Vec<f64>, Vec<f64>) {
    let n = time.len().min(value.len());
    if n < 2 || period.is_nan() || period <= 0.0 {
        return (Vec::new(), Vec::new());
    }
    let mut integral = vec![0.0; n];
    for i in 1..n {
        integral[i] = integral[i - 1] + 0.5 * (value[i] + value[i - 1]) * (time[i] - time[i - 1]);
    }
    let at = |t: f64| {
        // Last sample at or before t.
        let j = time[..n].partition_point(|&s| s <= t).saturating_sub(1);
        if j + 1 >= n {
            return integral[n - 1];
        }
        let h = t - time[j];
        let slope = (value[j + 1] - value[j]) / (time[j + 1] - time[j]);
        integral[j] + h * (value[j] + 0.5 * slope * h)
    };
    let half = 0.5 * period;
    let (first, last) = (time[0] + half, time[n - 1] - half);
    time[..n]
        .iter()
        .filter(|&&t| t >= first && t <= last)
        .map(|&t| (t, (at(t + half) - at(t - half)) / period))
        .unzip()
}
