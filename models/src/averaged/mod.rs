//! State-space-averaged small-signal model of a forward converter in CCM under the
//! voltage-mode controller (Middlebrook & Ćuk, "A general unified approach to modelling
//! switching-converter power stages", PESC 1976; Erickson & Maksimović, *Fundamentals of
//! Power Electronics*, 2nd ed., ch. 7 and 9).
//!
//! Method, chosen for consistency with the switching model: the averaged power stage
//! is written as a linear *circuit* around the operating point (solved in closed form
//! first), sharing the controller's own amplifier and compensation elements, and the
//! engine's nodal analysis forms its matrices. The loop is then closed
//! algebraically through the modulator: d = m·(peak − vc)/(peak − valley) (this
//! project's falling-ramp convention: more control voltage, less duty; m = ½ when the
//! outputs alternate). With the error amplifier sensing at its + input and the
//! reference behind Zi, the compensator the matrices realise is
//! vc = a(s)·(fb − v−), v− = (vc·Zi + ref·Zf)/(Zi + Zf), a(s) = A0/(1 + s·A0/ωGBW),
//! i.e. with the reference held, vc/fb = (1 + Zf/Zi)/(1 + (1 + Zf/Zi)/a(s)), which is
//! 1 + Zf/Zi for a → ∞ (the 1 is the + input's own "+fb" term).
//!
//! What averaging leaves out: switching ripple, the sampling of the PWM (valid well
//! below half the switching frequency, Erickson & Maksimović §7.6), the gate delay,
//! the magnetising current in the primary drops, duty clamp, current limit and
//! amplifier saturation (the operating point is refused if one is active).

mod circuit;
mod operating;
mod response;
#[cfg(test)]
mod tests;

use nalgebra::{DMatrix, DVector};

pub use operating::{operating_point, OperatingPoint, StageParameters};
pub use response::{period_average, transient, Crossover, Response, Transient};

use crate::controller::ControllerSpec;
use crate::error::ModelError;
use crate::template::ForwardDesign;

/// Inputs of the small-signal model, in column order of B and D.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Input {
    /// Load sink current at the output, amperes (positive draws from the output).
    LoadCurrent = 0,
    /// Source voltage, volts.
    Line = 1,
    /// Controller reference, volts.
    Reference = 2,
}

/// Outputs of the small-signal model, in row order of C and D.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Output {
    /// Output voltage, volts.
    OutputVoltage = 0,
    /// Output inductor current, amperes.
    InductorCurrent = 1,
    /// Control voltage (error-amplifier output), volts.
    ControlVoltage = 2,
    /// Converter duty, dimensionless.
    Duty = 3,
}

/// Number of [`Input`]s and [`Output`]s.
const INPUTS: usize = 3;
const OUTPUTS: usize = 4;

/// A linear model ẋ = A x + B u, y = C x + D u of perturbations about an operating point.
#[derive(Clone, Debug, PartialEq)]
pub struct StateSpace {
    /// State matrix, 1/s.
    pub a: DMatrix<f64>,
    /// Input matrix (columns in [`Input`] order).
    pub b: DMatrix<f64>,
    /// Output matrix (rows in [`Output`] order).
    pub c: DMatrix<f64>,
    /// Feedthrough.
    pub d: DMatrix<f64>,
    /// Which circuit element each state belongs to (inductor current, amperes, or
    /// capacitor voltage, volts).
    pub states: Vec<String>,
}

/// The averaged model of one design and controller at its operating point.
#[derive(Clone, Debug)]
pub struct AveragedModel {
    /// Stage parameters in secondary terms.
    pub parameters: StageParameters,
    /// The DC operating point from the averaged equations.
    pub operating_point: OperatingPoint,
    /// Closed-loop perturbation model; inputs [`Input`], outputs [`Output`].
    pub closed_loop: StateSpace,
    /// States at the operating point, from the closed-loop matrices.
    pub equilibrium: DVector<f64>,
    /// Outputs at the operating point ([`Output`] order), from the matrices.
    pub equilibrium_outputs: DVector<f64>,
    /// The loop opened at the modulator input (for power-stage and compensator
    /// transfer functions): inputs [`Input`] then the duty; outputs output voltage,
    /// inductor current and control voltage (the first three [`Output`]s).
    pub open_loop: StateSpace,
    /// Duty per volt of control voltage, m/(peak − valley), 1/V (duty falls as vc rises).
    modulator_gain: f64,
}

impl AveragedModel {
    /// Builds the model of `design` regulated by `spec` at the design's line and load.
    pub fn new(design: &ForwardDesign, spec: &ControllerSpec) -> Result<Self, ModelError> {
        let parameters = StageParameters::new(design, spec)?;
        let op = operating_point(&parameters, design, spec)?;
        let built = circuit::build(design, spec, &parameters, &op)?;
        let open = circuit::affine(&built.circuit, &built.inputs, &built.outputs)?;
        let o = &spec.oscillator;
        let beta = parameters.duty_per_ramp / (o.peak - o.valley);
        let vc = Output::ControlVoltage as usize;
        let duty = INPUTS;
        // d = α − β·vc with vc = C_v x + D_v u + D_vd d + f_v, solved for d.
        let gamma = 1.0 + beta * open.d[(vc, duty)];
        let g_x = open.c.row(vc) * (-beta / gamma);
        let g_u = open.d.row(vc).columns(0, INPUTS) * (-beta / gamma);
        let g_0 = (beta * o.peak - beta * open.f[vc]) / gamma;
        let b_d = open.b.column(duty);
        let a = &open.a + b_d * &g_x;
        let b = open.b.columns(0, INPUTS) + b_d * &g_u;
        let e = &open.e + b_d * g_0;
        let nx = a.nrows();
        let mut c = DMatrix::zeros(OUTPUTS, nx);
        let mut d = DMatrix::zeros(OUTPUTS, INPUTS);
        let mut f = DVector::zeros(OUTPUTS);
        for r in 0..OUTPUTS - 1 {
            let dd = open.d[(r, duty)];
            c.set_row(r, &(open.c.row(r) + &g_x * dd));
            d.set_row(r, &(open.d.row(r).columns(0, INPUTS) + &g_u * dd));
            f[r] = open.f[r] + dd * g_0;
        }
        c.set_row(OUTPUTS - 1, &g_x);
        d.set_row(OUTPUTS - 1, &g_u);
        f[OUTPUTS - 1] = g_0;
        let u0 = DVector::from_vec(vec![op.sink_current, op.line, spec.voltage_loop.reference]);
        let rhs = -(&b * &u0 + e);
        let x0 = a.clone().lu().solve(&rhs).ok_or_else(|| {
            ModelError::Infeasible("averaged model: the closed loop has no equilibrium".into())
        })?;
        let y0 = &c * &x0 + &d * &u0 + f;
        let closed_loop = StateSpace {
            a,
            b,
            c,
            d,
            states: open.states.clone(),
        };
        let open_loop = StateSpace {
            a: open.a,
            b: open.b,
            c: open.c,
            d: open.d,
            states: open.states,
        };
        Ok(AveragedModel {
            parameters,
            operating_point: op,
            closed_loop,
            equilibrium: x0,
            equilibrium_outputs: y0,
            open_loop,
            modulator_gain: beta,
        })
    }

    /// Value of an output at the operating point, from the matrices.
    pub fn dc(&self, output: Output) -> f64 {
        self.equilibrium_outputs[output as usize]
    }

    /// Modulator gain m/(peak − valley), duty per volt of control voltage, 1/V.
    pub fn modulator_gain(&self) -> f64 {
        self.modulator_gain
    }
}
