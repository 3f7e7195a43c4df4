//! The loop figures of a job whose limits ask for them, from the sampled-data model at
//! the steady state ([`crate::loopgain`]), read from fs/1000 to fs/2.

use super::{Drive, Job};
use crate::loopgain::{self, margins, peak_output_impedance, sampled_model, LinearOptions};
use crate::measure::Figure;

/// What the loop figures are read from.
struct Read {
    crossover: Option<f64>,
    phase_margin: Option<f64>,
    gain_margin: Option<f64>,
    peak_output_impedance: Option<f64>,
}

fn read(job: &Job) -> Result<Read, String> {
    let Drive::Controller(spec) = &job.drive else {
        return Err("the scenario runs open loop, so it has no loop gain".into());
    };
    let (_, m) = sampled_model(&job.design, spec, &LinearOptions::default())
        .map_err(|e| format!("linearising the period map at the steady state: {e}"))?;
    let fs = 1.0 / m.period;
    let (lo, hi) = (fs / 1000.0, fs / 2.0);
    let mg = margins(lo, hi, |f| Ok(m.at(f)?.loop_gain)).map_err(|e| e.to_string())?;
    let (_, z) = peak_output_impedance(&m, lo, hi).map_err(|e| e.to_string())?;
    Ok(Read {
        crossover: mg.crossover,
        phase_margin: mg.phase_margin,
        gain_margin: mg.gain_margin,
        peak_output_impedance: Some(z),
    })
}

/// Crossover (`loop.crossover`, Hz), phase margin (`loop.phase_margin_deg`, °), gain
/// margin (`loop.gain_margin_db`, dB) and peak closed-loop output impedance
/// (`loop.peak_output_impedance`, Ω). A figure that cannot be read (no controller, no
/// steady state, no crossing in range) is null with the reason, on one line.
pub fn loop_figures(job: &Job) -> Vec<Figure> {
    let (values, why) = match read(job) {
        Ok(r) => (
            [
                r.crossover,
                r.phase_margin,
                r.gain_margin,
                r.peak_output_impedance,
            ],
            None,
        ),
        Err(e) => ([None; 4], Some(e.replace('\n', " "))),
    };
    let defs = [
        &loopgain::CROSSOVER,
        &loopgain::PHASE_MARGIN,
        &loopgain::GAIN_MARGIN,
        &loopgain::PEAK_OUTPUT_IMPEDANCE,
    ];
    defs.into_iter()
        .zip(values)
        .map(|(def, value)| {
            let f = def.of(value.unwrap_or(f64::NAN));
            match value {
                Some(_) => f,
                None => f.because(why.clone().unwrap_or_else(|| {
                    "no crossing between fs/1000 and fs/2 (the loop gain stays on one side)".into()
                })),
            }
        })
        .collect()
}
