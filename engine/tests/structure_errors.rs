//! Specification: circuits the engine cannot turn into state equations, circuits whose
//! switching cannot be followed, and out-of-range values are refused with an error that
//! names what to change.
//!
//! Structural sources: a loop of capacitors and voltage sources, or a cut-set of
//! inductors and current sources, makes one state a combination of the others, so it
//! is not a free state (Chua & Lin, *Computer-Aided Analysis of Electronic Circuits*,
//! Prentice-Hall 1975, chapter on state equations: the normal tree must hold every
//! capacitor and voltage source, and its co-tree every inductor and current source).

use stepflux_engine::{
    Block, Circuit, DiodeParams, ElementKind, EngineError, NodeId, NullSink, Observation, Quantity,
    Signal, SimOptions, Simulation, SwitchParams, TimeGrid, Waveform, Winding,
};

const PERIOD: f64 = 10e-6;

/// The error `Simulation::new` gives, or a panic if it accepts the circuit.
fn refused(c: Circuit) -> EngineError {
    match Simulation::new(c, Observation::default(), SimOptions::for_period(PERIOD)) {
        Ok(_) => panic!("circuit was accepted"),
        Err(e) => e,
    }
}

fn sorted(v: &[String]) -> Vec<String> {
    let mut v = v.to_vec();
    v.sort();
    v
}

fn names(v: &[&str]) -> Vec<String> {
    sorted(&v.iter().map(|s| s.to_string()).collect::<Vec<_>>())
}

const DIODE: DiodeParams = DiodeParams {
    vf: 0.7,
    r_on: 0.01,
    r_off: 1e6,
};

#[test]
fn capacitor_across_an_ideal_voltage_source_is_a_capacitor_loop_naming_both() {
    let mut c = Circuit::new();
    let (vin, x) = (c.node("in"), c.node("x"));
    c.voltage_source("V1", vin, NodeId::GROUND, Waveform::Constant(5.0))
        .unwrap();
    c.capacitor("C1", vin, NodeId::GROUND, 1e-6, 0.0).unwrap();
    // Elsewhere, not in the loop: a resistor-fed capacitor.
    c.resistor("R2", vin, x, 1e3).unwrap();
    c.capacitor("C2", x, NodeId::GROUND, 1e-6, 0.0).unwrap();
    match refused(c) {
        EngineError::CapacitorLoop { elements } => {
            assert_eq!(sorted(&elements), names(&["C1", "V1"]))
        }
        e => panic!("expected a capacitor loop, got {e}"),
    }
}

#[test]
fn source_and_two_series_capacitors_form_a_loop_naming_exactly_those_three() {
    let mut c = Circuit::new();
    let (vin, mid, x) = (c.node("in"), c.node("mid"), c.node("x"));
    c.voltage_source("V1", vin, NodeId::GROUND, Waveform::Constant(5.0))
        .unwrap();
    c.capacitor("C1", vin, mid, 1e-6, 0.0).unwrap();
    c.capacitor("C2", mid, NodeId::GROUND, 1e-6, 0.0).unwrap();
    // A resistor at the middle node does not break the loop; C3 behind R3 is not in it.
    c.resistor("R1", mid, NodeId::GROUND, 1e3).unwrap();
    c.resistor("R3", vin, x, 1e3).unwrap();
    c.capacitor("C3", x, NodeId::GROUND, 1e-6, 0.0).unwrap();
    match refused(c) {
        EngineError::CapacitorLoop { elements } => {
            assert_eq!(sorted(&elements), names(&["C1", "C2", "V1"]))
        }
        e => panic!("expected a capacitor loop, got {e}"),
    }
}

#[test]
fn two_capacitors_in_parallel_are_a_capacitor_loop() {
    let mut c = Circuit::new();
    let (vin, out) = (c.node("in"), c.node("out"));
    c.voltage_source("V1", vin, NodeId::GROUND, Waveform::Constant(5.0))
        .unwrap();
    c.resistor("R1", vin, out, 1e3).unwrap();
    c.capacitor("C1", out, NodeId::GROUND, 1e-6, 0.0).unwrap();
    c.capacitor("C2", out, NodeId::GROUND, 2e-6, 0.0).unwrap();
    match refused(c) {
        EngineError::CapacitorLoop { elements } => {
            assert_eq!(sorted(&elements), names(&["C1", "C2"]))
        }
        e => panic!("expected a capacitor loop, got {e}"),
    }
}

#[test]
fn a_series_resistor_breaks_the_capacitor_loop_so_the_circuit_is_accepted() {
    let mut c = Circuit::new();
    let (vin, a) = (c.node("in"), c.node("a"));
    c.voltage_source("V1", vin, NodeId::GROUND, Waveform::Constant(5.0))
        .unwrap();
    c.resistor("R1", vin, a, 1e-3).unwrap();
    c.capacitor("C1", a, NodeId::GROUND, 1e-6, 0.0).unwrap();
    assert!(Simulation::new(c, Observation::default(), SimOptions::for_period(PERIOD)).is_ok());
}

#[test]
fn two_inductors_in_series_with_nothing_else_at_the_middle_node_are_an_inductor_cut_set() {
    let mut c = Circuit::new();
    let (vin, a, mid, out) = (c.node("in"), c.node("a"), c.node("mid"), c.node("out"));
    c.voltage_source("V1", vin, NodeId::GROUND, Waveform::Constant(5.0))
        .unwrap();
    c.resistor("R1", vin, a, 1.0).unwrap();
    c.inductor("L1", a, mid, 1e-6, 0.0).unwrap();
    c.inductor("L2", mid, out, 1e-6, 0.0).unwrap();
    c.resistor("R2", out, NodeId::GROUND, 1.0).unwrap();
    match refused(c) {
        EngineError::InductorCutSet { elements, nodes } => {
            assert_eq!(sorted(&elements), names(&["L1", "L2"]));
            assert_eq!(nodes, names(&["mid"]));
        }
        e => panic!("expected an inductor cut-set, got {e}"),
    }
}

#[test]
fn an_inductor_in_series_with_a_current_source_is_an_inductor_cut_set() {
    let mut c = Circuit::new();
    let (x, y) = (c.node("x"), c.node("y"));
    // I1 draws its current out of ground into x; L1 then must carry exactly it.
    c.current_source("I1", NodeId::GROUND, x, Waveform::Constant(1.0))
        .unwrap();
    c.inductor("L1", x, y, 1e-6, 0.0).unwrap();
    c.resistor("R1", y, NodeId::GROUND, 1.0).unwrap();
    match refused(c) {
        EngineError::InductorCutSet { elements, nodes } => {
            assert_eq!(sorted(&elements), names(&["I1", "L1"]));
            assert_eq!(nodes, names(&["x"]));
        }
        e => panic!("expected an inductor cut-set, got {e}"),
    }
}

/// Primary driven through R1 with magnetising inductance Lm; isolated secondary
/// s1–s2 loaded by R2, optionally referenced to ground through R3.
fn transformer_circuit(referenced: bool) -> Circuit {
    let mut c = Circuit::new();
    let (vin, p, s1, s2) = (c.node("in"), c.node("p"), c.node("s1"), c.node("s2"));
    c.voltage_source("V1", vin, NodeId::GROUND, Waveform::Constant(5.0))
        .unwrap();
    c.resistor("R1", vin, p, 1.0).unwrap();
    c.inductor("Lm", p, NodeId::GROUND, 1e-3, 0.0).unwrap();
    let windings = vec![
        Winding {
            dot: p,
            other: NodeId::GROUND,
            turns: 10.0,
        },
        Winding {
            dot: s1,
            other: s2,
            turns: 5.0,
        },
    ];
    c.transformer("T1", windings).unwrap();
    c.resistor("R2", s1, s2, 10.0).unwrap();
    if referenced {
        c.resistor("R3", s2, NodeId::GROUND, 1e6).unwrap();
    }
    c
}

#[test]
fn an_isolated_transformer_secondary_with_no_reference_is_floating() {
    // An ideal transformer fixes only voltage differences across a winding, so nothing
    // fixes the secondary's common-mode voltage: the nodal matrix would be singular.
    match refused(transformer_circuit(false)) {
        EngineError::FloatingNodes { nodes } => assert_eq!(sorted(&nodes), names(&["s1", "s2"])),
        e => panic!("expected floating nodes, got {e}"),
    }
    let ok = Simulation::new(
        transformer_circuit(true),
        Observation::default(),
        SimOptions::for_period(PERIOD),
    );
    assert!(
        ok.is_ok(),
        "a 1 MΩ reference makes the secondary determinate"
    );
}

/// Checks an event-storm error and returns its time.
fn storm_of(e: EngineError, options: &SimOptions, grid: &TimeGrid) -> f64 {
    match e {
        EngineError::EventStorm {
            time,
            count,
            window,
            topology,
            elements,
        } => {
            println!("storm at t = {time:e} s, {count} events in {window:e} s, [{topology}], {elements:?}");
            assert_eq!(count, options.storm.max_events);
            // The window is kept in whole ticks.
            assert!((window - options.storm.window).abs() <= grid.quantum);
            assert_eq!(elements, vec!["D1".to_string()]);
            assert!(
                topology == "on: D1" || topology == "all switches and diodes off",
                "topology [{topology}] must describe D1's state"
            );
            time
        }
        e => panic!("expected an event storm, got {e}"),
    }
}

#[test]
fn a_diode_driven_by_a_fast_triangle_trips_the_storm_guard_at_the_500th_switching() {
    // D1 and R1 in series across a ±2 V triangle of period P = 168 quanta (100 ps):
    // two diode events per period, 2000 per 100 ns guard window against 500 allowed.
    let options = SimOptions::for_period(PERIOD);
    let grid = TimeGrid::new(options.max_step, options.event_resolution).unwrap();
    let (amp, r) = (2.0, 10.0);
    let p = 168.0 * grid.quantum;
    let points: Vec<(f64, f64)> = (0..=600)
        .map(|k| (k as f64 * p / 2.0, if k % 2 == 0 { -amp } else { amp }))
        .collect();
    let mut c = Circuit::new();
    let (vin, k) = (c.node("in"), c.node("k"));
    c.voltage_source("V1", vin, NodeId::GROUND, Waveform::PiecewiseLinear(points))
        .unwrap();
    c.diode("D1", vin, k, DIODE).unwrap();
    c.resistor("R1", k, NodeId::GROUND, r).unwrap();
    let mut sim = Simulation::new(c, Observation::default(), options).unwrap();
    let e = sim.advance(290.0 * p, &mut NullSink).unwrap_err();
    let time = storm_of(e, &options, &grid);
    // Closed form of the switching instants (the diode as two resistive segments,
    // R1 in series): off, it turns on when the source exceeds vf·(1 + R/r_off) (its
    // share of the source across r_off reaches vf); on, it turns off when the source
    // falls below vf (its current (v − vf)/(R + r_on) reaches zero). The guard, 500
    // events per window, trips at the 500th, the turn-off in period 250 (index 249):
    //   t = 249 P + P/2 + (A − vf)/(2A) · P/2 on the falling edge.
    let t_500 = 249.0 * p + p / 2.0 + (amp - DIODE.vf) / (2.0 * amp) * p / 2.0;
    // Located to the first tick after the crossing (the engine's event resolution).
    assert!(
        (time - t_500).abs() <= grid.quantum,
        "storm at {time:e} s, 500th switching at {t_500:e} s"
    );
}

#[test]
fn a_diode_in_a_fast_integrator_loop_chatters_and_trips_the_storm_guard() {
    // A fast integrator x' = k (i_D − i_ref) drives the source E1 = x across D1 + R1.
    // The two-segment diode switches on where its share of x across r_off reaches vf,
    // x_b = vf (1 + R/r_off), and off where its on-current (x − vf)/(R + r_on) reaches
    // zero, x = vf: a hysteresis of vf·R/r_off (0.7 mV here). Blocking, D1 leaks
    // ≈ vf/r_off = 2 i_ref, so x rises to x_b; conducting with r_on > R, its current
    // at x_b is below i_ref, so x falls back to vf: a relaxation oscillation.
    //
    // A stable loop cannot do this: near the threshold both diode states give the same
    // circuit up to vf/r_off, so a loop that is stable in both states settles in one
    // of them. The conducting state here has the positive eigenvalue k/(R + r_on)
    // = 1e10 s⁻¹, so max_step is cut to 10 ns (e^{100} stays finite; with the default
    // T/4 the propagator overflows and the engine reports NonFinite instead).
    //
    // Closed form of one cycle (each phase is linear, x' = λ x − k i_ref):
    //   blocking, λ_b = k/(R + r_off), from vf to x_b:
    //     t_b = ln((x_b − x_eb)/(vf − x_eb))/λ_b, x_eb = i_ref (R + r_off);
    //   conducting, d = x − vf, λ_c = k/(R + r_on), from d0 = x_b − vf to 0:
    //     t_c = ln(d_ec/(d_ec − d0))/λ_c, d_ec = i_ref (R + r_on).
    // Two events per cycle; the guard (500 per 100 ns) trips at the 500th, the end of
    // cycle 250.
    let mut options = SimOptions::for_period(PERIOD);
    options.max_step = 10e-9;
    options.storm.window = 100e-9;
    let grid = TimeGrid::new(options.max_step, options.event_resolution).unwrap();
    let diode = DiodeParams {
        vf: 0.7,
        r_on: 3.0,
        r_off: 1e3,
    };
    let r = 1.0;
    let gain = 1e10 * (r + diode.r_on);
    let i_ref = diode.vf / (2.0 * diode.r_off);
    let mut c = Circuit::new();
    let (a, k) = (c.node("a"), c.node("k"));
    let d1 = c.diode("D1", a, k, diode).unwrap();
    c.resistor("R1", k, NodeId::GROUND, r).unwrap();
    let block = c
        .block(Block {
            name: "integrator".into(),
            a: vec![vec![0.0]],
            b: vec![vec![gain]],
            c: vec![vec![1.0]],
            d: vec![],
            inputs: vec![Signal::of(Quantity::Current(d1)).plus(-i_ref, Quantity::One)],
            // Start on the turn-off threshold, blocking: the cycle is periodic from t = 0.
            initial_state: vec![diode.vf],
        })
        .unwrap();
    c.add(
        "E1",
        a,
        NodeId::GROUND,
        ElementKind::BlockVoltageSource { block, output: 0 },
    )
    .unwrap();
    let mut sim = Simulation::new(c, Observation::default(), options).unwrap();
    let e = sim.advance(PERIOD, &mut NullSink).unwrap_err();
    let time = storm_of(e, &options, &grid);

    let x_b = diode.vf * (1.0 + r / diode.r_off);
    let (lambda_b, x_eb) = (gain / (r + diode.r_off), i_ref * (r + diode.r_off));
    let t_b = ((x_b - x_eb) / (diode.vf - x_eb)).ln() / lambda_b;
    let (lambda_c, d_ec) = (gain / (r + diode.r_on), i_ref * (r + diode.r_on));
    let t_c = (d_ec / (d_ec - (x_b - diode.vf))).ln() / lambda_c;
    let t_500 = 250.0 * (t_b + t_c);
    // Each event is located up to one tick late, and starting a phase past its
    // threshold by x'·q shifts its end by at most that overshoot over the next phase's
    // speed; the speeds at both thresholds are within a factor 2 of each other, so each
    // event adds at most 3 ticks: 1500 ticks over 500 events.
    println!(
        "cycle {:.4e} s, 500th event predicted at {t_500:.6e} s",
        t_b + t_c
    );
    assert!(
        (time - t_500).abs() <= 1500.0 * grid.quantum,
        "storm at {time:e} s, predicted {t_500:e} s"
    );
}

#[test]
fn a_diode_in_series_with_a_negative_resistance_has_no_consistent_state() {
    // A current-controlled voltage source v = −k·i_D (a negative resistance, as a
    // negative-impedance converter makes one) in series with D1 across 1 V.
    // KVL: 1 = v_D − k i. Conducting, v_D = vf + r_on i gives i = (1 − vf)/(r_on − k) < 0
    // for k > r_on: inconsistent. Blocking, v_D = r_off i gives
    // v_D = r_off/(r_off − k) > 1 V > vf for k < r_off: inconsistent too. With
    // r_on < k < r_off neither state holds, so settling must report D1.
    let k = 10.0;
    let mut c = Circuit::new();
    let (vin, x) = (c.node("in"), c.node("x"));
    c.voltage_source("V1", vin, NodeId::GROUND, Waveform::Constant(1.0))
        .unwrap();
    let d1 = c.diode("D1", vin, x, DIODE).unwrap();
    c.controlled_voltage_source(
        "E1",
        x,
        NodeId::GROUND,
        Signal::default().plus(-k, Quantity::Current(d1)),
    )
    .unwrap();
    match refused(c) {
        EngineError::InconsistentDiodes { time, elements } => {
            assert_eq!(time, 0.0);
            assert_eq!(elements, names(&["D1"]));
        }
        e => panic!("expected inconsistent diodes, got {e}"),
    }
}

#[test]
fn negative_resistance_is_a_bad_value_naming_the_resistor() {
    let mut c = Circuit::new();
    let a = c.node("a");
    c.voltage_source("V1", a, NodeId::GROUND, Waveform::Constant(1.0))
        .unwrap();
    c.resistor("Rload", a, NodeId::GROUND, -5.0).unwrap();
    let e = refused(c);
    assert!(e.to_string().contains("Rload"), "message: {e}");
    assert!(
        matches!(&e, EngineError::BadValue { element, value, .. } if element == "Rload" && *value == -5.0),
        "got {e:?}"
    );
}

#[test]
fn off_resistance_not_above_on_resistance_is_a_bad_value_for_switches_and_diodes() {
    for (kind, r_on, r_off) in [("switch", 1.0, 1.0), ("diode", 10.0, 1.0)] {
        let mut c = Circuit::new();
        let (a, b) = (c.node("a"), c.node("b"));
        c.voltage_source("V1", a, NodeId::GROUND, Waveform::Constant(1.0))
            .unwrap();
        c.resistor("R1", b, NodeId::GROUND, 1.0).unwrap();
        let name = if kind == "switch" {
            c.switch("Sbad", a, b, SwitchParams { r_on, r_off }, true)
                .unwrap();
            "Sbad"
        } else {
            let params = DiodeParams {
                vf: 0.7,
                r_on,
                r_off,
            };
            c.diode("Dbad", a, b, params).unwrap();
            "Dbad"
        };
        let e = refused(c);
        assert!(e.to_string().contains(name), "message: {e}");
        assert!(
            matches!(&e, EngineError::BadValue { element, value, .. } if element == name && *value == r_off),
            "{kind}: got {e:?}"
        );
    }
}
