//! Diode settling when the greedy rule cycles.
//!
//! With every diode a two-valued resistor (vf ≥ 0, r_on < r_off) and otherwise passive
//! elements, the diode states at an instant solve a linear complementarity problem
//! whose matrix is a P-matrix, so a consistent state exists and is unique (Cottle, Pang
//! & Stone, *The Linear Complementarity Problem*, 1992, ch. 3 — from memory). The
//! engine must find it rather than report the diodes as inconsistent.
//!
//! The case: an active clamp without output capacitance on the main switch. At the
//! auxiliary switch's turn-off the magnetising current has no capacitive path, and the
//! rectifier, freewheel and both body diodes all change together; flipping the most
//! violated diode one at a time goes round in a loop.

use stepflux_engine::{NullSink, SimOptions};
use stepflux_models::components::{Capacitor, Diode};
use stepflux_models::cycles::CycleRecord;
use stepflux_models::demo_design::{demo_design, primary_switch, DEMO_FREQUENCY};
use stepflux_models::gate::OpenLoopGate;
use stepflux_models::run::ConverterRun;
use stepflux_models::template::ResetScheme;

#[test]
fn active_clamp_without_coss_settles_at_every_auxiliary_turn_off() {
    let body = Diode {
        vf: 0.7,
        rd: 0.02,
        r_off: 1e7,
        junction_capacitance: 0.0,
        reverse_rating: 100.0,
    };
    let mut d = demo_design();
    d.switch.body_diode = Some(body.clone());
    let mut aux = primary_switch();
    aux.body_diode = Some(body);
    d.reset = ResetScheme::ActiveClamp {
        aux_switch: aux,
        capacitor: Capacitor {
            capacitance: 1e-6,
            esr: 0.1,
        },
        initial_voltage: 24.0 * 0.35 / 0.65,
    };
    let gate = OpenLoopGate {
        frequency: DEMO_FREQUENCY,
        duty: 0.35,
        dead_time: 20e-9,
    };
    let conv = d.build().expect("design builds");
    let mut run =
        ConverterRun::new(&conv, SimOptions::for_period(gate.period()), Vec::new()).expect("run");
    let mut cycles: Vec<CycleRecord> = Vec::new();
    gate.run(&mut run, 20, &mut NullSink, &mut cycles)
        .expect("every instant settles");
    assert_eq!(cycles.len(), 20);
}
