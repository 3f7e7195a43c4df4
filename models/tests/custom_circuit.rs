//! A circuit the templates do not cover, described from the same components with the
//! same building blocks (`template::Net`) and run on the engine: a buck stage (the
//! forward converter's secondary side without the transformer) from an ideal source.
//!
//! Expected: CCM averaged output Vo = D·Vin − D·r_on·Io − (1 − D)·(vf + rd·Io) −
//! DCR·Io (volt-second balance on the inductor with resistive and threshold drops,
//! Erickson & Maksimović, *Fundamentals of Power Electronics*, 2nd ed., ch. 3), within
//! 0.5 %: the averaged relation neglects only the ripple's effect on the drops
//! (ΔI ≈ 0.2·Io here, second order in the drops).

use stepflux_engine::{
    NodeId, NullSink, Observation, Quantity, Signal, SimOptions, Simulation, Waveform,
};
use stepflux_models::components::{Capacitor, Diode, Switch};
use stepflux_models::template::Net;

#[test]
fn buck_built_from_forward_components_meets_volt_second_balance() {
    let (vin, duty, f, r_load) = (12.0, 0.4, 100e3, 2.0);
    let sw = Switch {
        r_on: 0.02,
        r_off: 1e7,
        output_capacitance: 0.0,
        body_diode: None,
        voltage_rating: 30.0,
        transitions: None,
        gate_drive: None,
    };
    let fw = Diode {
        vf: 0.4,
        rd: 0.01,
        r_off: 1e6,
        junction_capacitance: 0.0,
        reverse_rating: 30.0,
    };
    let (l, dcr) = (47e-6, 0.015);
    let mut net = Net::new();
    let (src, x, mid, out) = (
        net.node("in"),
        net.node("x"),
        net.node("l.dcr"),
        net.node("out"),
    );
    net.circuit()
        .voltage_source("vin", src, NodeId::GROUND, Waveform::Constant(vin))
        .unwrap();
    let switch = net.switch("sw", src, x, &sw).unwrap();
    net.diode("fw", NodeId::GROUND, x, &fw).unwrap();
    net.circuit().inductor("l", x, mid, l, 0.0).unwrap();
    net.circuit().resistor("l.dcr", mid, out, dcr).unwrap();
    net.capacitor(
        "c",
        out,
        NodeId::GROUND,
        &Capacitor {
            capacitance: 100e-6,
            esr: 0.005,
        },
        0.0,
    )
    .unwrap();
    net.circuit()
        .resistor("load", out, NodeId::GROUND, r_load)
        .unwrap();
    let obs = Observation {
        probes: vec![("out.v".into(), Signal::of(Quantity::NodeVoltage(out)))],
        ..Default::default()
    };
    let period = 1.0 / f;
    let mut sim = Simulation::new(net.into_circuit(), obs, SimOptions::for_period(period)).unwrap();
    // Settle (output LC time constants ≪ 3 ms), then average the output over whole
    // periods from evenly spaced samples, the gate switching at its exact edges.
    let (settle, keep, per) = (300usize, 20usize, 64usize);
    let mut sum = 0.0;
    for k in 0..settle + keep {
        let t0 = k as f64 * period;
        sim.set_gate(switch, true).unwrap();
        let mut gate_on = true;
        for j in 0..per {
            let t = t0 + j as f64 * period / per as f64;
            if gate_on && t >= t0 + duty * period {
                sim.advance(t0 + duty * period, &mut NullSink).unwrap();
                sim.set_gate(switch, false).unwrap();
                gate_on = false;
            }
            sim.advance(t, &mut NullSink).unwrap();
            if k >= settle {
                sum += sim.probe(0);
            }
        }
        sim.advance(t0 + period, &mut NullSink).unwrap();
    }
    let measured = sum / (keep * per) as f64;
    // Solve the averaged relation for Vo (Io = Vo/R appears on both sides).
    let io_coef = duty * sw.r_on + (1.0 - duty) * fw.rd + dcr;
    let expected = (duty * vin - (1.0 - duty) * fw.vf) / (1.0 + io_coef / r_load);
    let err = (measured - expected) / expected;
    eprintln!(
        "custom buck: measured {measured:.5} V, averaged model {expected:.5} V, error {:.3e}",
        err
    );
    assert!(err.abs() < 5e-3);
}
