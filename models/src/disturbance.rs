//! Scenario disturbances — load, line and reference steps at set times — turned into
//! the scheduled actions a run applies.

use stepflux_engine::Waveform;

use crate::components::{non_negative, positive};
use crate::error::ModelError;
use crate::run::Action;
use crate::template::{Converter, Net};

/// A change of operating point at a set time.
#[derive(Clone, Debug, PartialEq)]
pub enum Disturbance {
    /// The load current sink moves to `to` amperes at `slew` A/s (0 = a step).
    LoadCurrent {
        /// Seconds.
        time: f64,
        /// Amperes.
        to: f64,
        /// Amperes per second; 0 for an instant step.
        slew: f64,
    },
    /// The load resistor is replaced by `to` ohms (an instant step).
    LoadResistance {
        /// Seconds.
        time: f64,
        /// Ohms.
        to: f64,
    },
    /// The input source moves to `to` volts at `slew` V/s (0 = a step).
    Line {
        /// Seconds.
        time: f64,
        /// Volts.
        to: f64,
        /// Volts per second; 0 for an instant step.
        slew: f64,
    },
    /// The controller reference moves to `to` volts at `slew` V/s (0 = a step).
    Reference {
        /// Seconds.
        time: f64,
        /// Volts.
        to: f64,
        /// Volts per second; 0 for an instant step.
        slew: f64,
    },
}

impl Disturbance {
    /// When it starts, seconds.
    pub fn time(&self) -> f64 {
        match *self {
            Disturbance::LoadCurrent { time, .. }
            | Disturbance::LoadResistance { time, .. }
            | Disturbance::Line { time, .. }
            | Disturbance::Reference { time, .. } => time,
        }
    }
}

/// Adds what the disturbances need to the circuit (a switched branch per new load
/// resistance) and returns the converter with the actions that carry them out.
/// `reference` is the controller's reference source, if a controller is attached.
pub fn prepare(
    conv: &Converter,
    list: &[Disturbance],
    reference: Option<stepflux_engine::ElementId>,
) -> Result<(Converter, Vec<(f64, Action)>), ModelError> {
    let mut sorted: Vec<(usize, &Disturbance)> = list.iter().enumerate().collect();
    sorted.sort_by(|a, b| a.1.time().total_cmp(&b.1.time()));
    let key = &conv.key;
    let mut net = Net::from_circuit(conv.circuit.clone());
    let mut actions = Vec::new();
    let mut load_i = conv.design.load.current.unwrap_or(0.0);
    let mut line = conv.design.input.voltage;
    let mut reference_v = reference
        .map(|r| source_final_value(conv, r))
        .unwrap_or(0.0);
    let mut load_switch = key.load_switch;
    for (k, d) in sorted {
        let field = format!("disturbances[{k}]");
        non_negative(&format!("{field}.time"), d.time())?;
        match *d {
            Disturbance::LoadCurrent { time, to, slew } => {
                non_negative(&format!("{field}.to"), to)?;
                ramp(&mut actions, key.load_sink, time, load_i, to, slew, &field)?;
                load_i = to;
            }
            Disturbance::Line { time, to, slew } => {
                positive(&format!("{field}.to"), to)?;
                ramp(&mut actions, key.input_source, time, line, to, slew, &field)?;
                line = to;
            }
            Disturbance::Reference { time, to, slew } => {
                let Some(src) = reference else {
                    return Err(ModelError::Infeasible(format!(
                        "{field}: a reference step needs a controller"
                    )));
                };
                positive(&format!("{field}.to"), to)?;
                ramp(&mut actions, src, time, reference_v, to, slew, &field)?;
                reference_v = to;
            }
            Disturbance::LoadResistance { time, to } => {
                positive(&format!("{field}.to"), to)?;
                let out = net.node("out");
                let new = net.switched_load(out, &format!("load.r{k}"), to, false)?;
                if let Some(old) = load_switch {
                    actions.push((
                        time,
                        Action::Gate {
                            switch: old,
                            on: false,
                        },
                    ));
                }
                actions.push((
                    time,
                    Action::Gate {
                        switch: new,
                        on: true,
                    },
                ));
                load_switch = Some(new);
            }
        }
    }
    let mut with = conv.clone();
    with.circuit = net.into_circuit();
    Ok((with, actions))
}

/// Instants, seconds, at which more than one action applies (a load-resistance step
/// turns one branch off and another on; two events may share a time). The run applies
/// such actions one after another, so what lies between them is no state the circuit
/// passes through.
pub fn shared_instants(actions: &[(f64, Action)]) -> Vec<f64> {
    let mut times: Vec<f64> = actions.iter().map(|a| a.0).collect();
    times.sort_by(f64::total_cmp);
    let mut shared: Vec<f64> = times
        .windows(2)
        .filter(|w| w[0] == w[1])
        .map(|w| w[0])
        .collect();
    shared.dedup();
    shared
}

/// Value a source settles to (the last point of its waveform).
fn source_final_value(conv: &Converter, id: stepflux_engine::ElementId) -> f64 {
    match &conv.circuit.element(id).kind {
        stepflux_engine::ElementKind::VoltageSource { waveform }
        | stepflux_engine::ElementKind::CurrentSource { waveform } => match waveform {
            Waveform::Constant(v) => *v,
            Waveform::PiecewiseLinear(p) => p.last().map_or(0.0, |x| x.1),
        },
        _ => 0.0,
    }
}

/// A step (slew 0) or a ramp from `from` to `to` starting at `time`.
fn ramp(
    actions: &mut Vec<(f64, Action)>,
    element: stepflux_engine::ElementId,
    time: f64,
    from: f64,
    to: f64,
    slew: f64,
    field: &str,
) -> Result<(), ModelError> {
    non_negative(&format!("{field}.slew"), slew)?;
    if slew == 0.0 || from == to {
        actions.push((
            time,
            Action::Source {
                element,
                value: to,
                slope: 0.0,
            },
        ));
        return Ok(());
    }
    let duration = (to - from).abs() / slew;
    let slope = (to - from).signum() * slew;
    actions.push((
        time,
        Action::Source {
            element,
            value: from,
            slope,
        },
    ));
    actions.push((
        time + duration,
        Action::Source {
            element,
            value: to,
            slope: 0.0,
        },
    ));
    Ok(())
}
