//! Controlled sources in the nodal formulation: closed-form DC answers.
//!
//! Expected values are the textbook relations for dependent sources and for a
//! finite-gain amplifier with feedback, A/(1 + A·β) (Sedra & Smith, *Microelectronic
//! Circuits*, ch. on feedback: closed-loop gain of a finite-gain amplifier). The engine
//! solves these linear equations directly, so agreement is to round-off (1e-12).

use stepflux_engine::{
    Circuit, NodeId, NullSink, Observation, Quantity, Signal, SimOptions, Simulation, Waveform,
};

fn settle(c: Circuit, probe: Signal) -> f64 {
    let obs = Observation {
        probes: vec![("p".into(), probe)],
        ..Default::default()
    };
    let mut sim = Simulation::new(c, obs, SimOptions::for_period(1e-6)).unwrap();
    sim.advance(1e-6, &mut NullSink).unwrap();
    sim.probe(0)
}

#[test]
fn voltage_controlled_voltage_source_multiplies_its_control() {
    let mut c = Circuit::new();
    let (vin, out) = (c.node("in"), c.node("out"));
    c.voltage_source("v", vin, NodeId::GROUND, Waveform::Constant(1.5))
        .unwrap();
    c.controlled_voltage_source(
        "e",
        out,
        NodeId::GROUND,
        Signal {
            terms: vec![(2.0, Quantity::NodeVoltage(vin))],
        },
    )
    .unwrap();
    c.resistor("rl", out, NodeId::GROUND, 10.0).unwrap();
    assert!((settle(c, Signal::of(Quantity::NodeVoltage(out))) - 3.0).abs() < 1e-12);
}

#[test]
fn current_controlled_current_source_mirrors_a_branch_current() {
    // 1 V across 100 Ω gives 10 mA; a 0.5× mirror pushes 5 mA into 200 Ω: 1 V.
    let mut c = Circuit::new();
    let (vin, out) = (c.node("in"), c.node("out"));
    c.voltage_source("v", vin, NodeId::GROUND, Waveform::Constant(1.0))
        .unwrap();
    let r1 = c.resistor("r1", vin, NodeId::GROUND, 100.0).unwrap();
    // Current flows gnd → out through the source, i.e. into node out.
    c.controlled_current_source(
        "f",
        NodeId::GROUND,
        out,
        Signal {
            terms: vec![(0.5, Quantity::Current(r1))],
        },
    )
    .unwrap();
    c.resistor("r2", out, NodeId::GROUND, 200.0).unwrap();
    assert!((settle(c, Signal::of(Quantity::NodeVoltage(out))) - 1.0).abs() < 1e-12);
}

#[test]
fn finite_gain_follower_settles_at_a_over_one_plus_a() {
    // out = A·(in − out): a unity-feedback amplifier of gain A = 1000.
    let a = 1000.0;
    let mut c = Circuit::new();
    let (vin, out) = (c.node("in"), c.node("out"));
    c.voltage_source("v", vin, NodeId::GROUND, Waveform::Constant(2.0))
        .unwrap();
    let control = Signal {
        terms: vec![
            (a, Quantity::NodeVoltage(vin)),
            (-a, Quantity::NodeVoltage(out)),
        ],
    };
    c.controlled_voltage_source("amp", out, NodeId::GROUND, control)
        .unwrap();
    c.resistor("rl", out, NodeId::GROUND, 1e3).unwrap();
    let expected = 2.0 * a / (1.0 + a);
    assert!((settle(c, Signal::of(Quantity::NodeVoltage(out))) - expected).abs() < 1e-12);
}
