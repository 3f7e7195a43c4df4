//! The periodic steady state found by shooting equals the state that plain periods
//! settle to.
//!
//! Specification: a converter under a periodic drive settles to a periodic orbit, the
//! fixed point of its period map (Aprille & Trick, "Steady-state analysis of nonlinear
//! circuits with periodic inputs", Proc. IEEE 60(1), 1972, §II). Shooting finds it by
//! Newton's method; brute force runs plain periods until the change per period is below
//! 1e-10 relative (1e-10 A or V floor). That leaves brute force within about
//! 1e-10/(1 − ρ) ≈ 3e-9 of the fixed point for the slowest multiplier ρ ≈ 0.97 of
//! these cases, and shooting (to 1e-9 with its Newton correction) within 1e-9, so every
//! state must agree to 1e-6 relative or a floor of 1e-8 A or V (for states that sit near
//! zero, like a compensation capacitor at 40 µV): three orders of margin on both.
//! Cases: open loop in CCM and DCM, the closed loop in CCM and DCM and in alternating
//! mode, and every reset scheme.

use stepflux_models::components::{Capacitor, Diode};
use stepflux_models::controller::OutputMode;
use stepflux_models::demo_design::{
    demo_controller, demo_design, primary_switch, reset_diode, DEMO_FREQUENCY,
};
use stepflux_models::gate::OpenLoopGate;
use stepflux_models::steady::map::{trial_options, ClosedLoopMap, OpenLoopMap, PeriodMap};
use stepflux_models::steady::names::place;
use stepflux_models::steady::{brute, shoot, ShootingOptions, SteadyError, SteadyState, Tolerance};
use stepflux_models::template::{ForwardDesign, ResetScheme};

const REL: f64 = 1e-6;
const FLOOR: f64 = 1e-8;

fn gate(duty: f64, dead_time: f64) -> OpenLoopGate {
    OpenLoopGate {
        frequency: DEMO_FREQUENCY,
        duty,
        dead_time,
    }
}

fn open(design: &ForwardDesign, g: OpenLoopGate) -> OpenLoopMap {
    let conv = design.build().expect("design builds");
    OpenLoopMap::new(&conv, g, trial_options(g.period())).expect("run builds")
}

/// Shoots, settles by plain periods from the same start, and compares state by state.
fn agree<M: PeriodMap>(map: &mut M, label: &str) -> SteadyState {
    let steady = shoot(map, &ShootingOptions::default())
        .unwrap_or_else(|e| panic!("{label}: shooting failed: {e}"));
    let tight = Tolerance {
        relative: 1e-10,
        current: 1e-10,
        voltage: 1e-10,
        block: 1e-10,
    };
    let start = map.guess();
    let settled = brute::settle(map, start, &tight, 40_000).expect("plain periods run");
    assert!(
        settled.norm <= 1.0,
        "{label}: brute force did not settle in {} periods (norm {:e})",
        settled.work.periods,
        settled.norm
    );
    for (k, n) in steady.names.iter().enumerate() {
        let (s, b) = (steady.x[k], settled.x[k]);
        let err = (s - b).abs();
        println!(
            "{label}: {} shooting {s:.12e} brute {b:.12e} diff {err:.2e}",
            n.name
        );
        assert!(
            err <= REL * b.abs() + FLOOR,
            "{label}: state {} differs: shooting {s}, brute force {b}",
            n.name
        );
    }
    println!(
        "{label}: shooting {} periods ({} Jacobians), brute force {} periods; history {:?}",
        steady.work.periods, steady.work.newton, settled.work.periods, steady.history
    );
    steady
}

#[test]
fn open_loop_ccm_reset_winding() {
    let s = agree(&mut open(&demo_design(), gate(0.35, 0.0)), "open CCM");
    // CCM: the inductor current at the clock edge is its valley, well above zero.
    assert!(s.get("lout").unwrap() > 1.0);
}

#[test]
fn open_loop_dcm() {
    // 20 Ω: 0.3 A against a ripple of about 1.7 A, so the inductor current falls to zero
    // in every period (Erickson & Maksimović, ch. 5: DCM when K = 2L/(R·T) < 1 − D;
    // here K = 0.23).
    let mut d = demo_design();
    d.load.resistance = Some(20.0);
    let s = agree(&mut open(&d, gate(0.35, 0.0)), "open DCM");
    assert!(
        s.get("lout").unwrap().abs() < 1e-3,
        "not in DCM at the clock edge"
    );
}

#[test]
fn closed_loop_ccm() {
    let spec = demo_controller();
    let mut map =
        ClosedLoopMap::new(&demo_design(), &spec, trial_options(spec.clock_period())).unwrap();
    let s = agree(&mut map, "closed CCM");
    // Regulated: the output at the clock edge within 1 % of the 5 V set point.
    assert!((s.get("cout").unwrap() - 5.0).abs() < 0.05);
}

#[test]
fn closed_loop_dcm() {
    // 20 Ω (0.25 A): DCM as in the open-loop case, now with the loop regulating.
    let mut d = demo_design();
    d.load.resistance = Some(20.0);
    let spec = demo_controller();
    let mut map = ClosedLoopMap::new(&d, &spec, trial_options(spec.clock_period())).unwrap();
    let s = agree(&mut map, "closed DCM");
    assert!(
        s.get("lout").unwrap().abs() < 1e-3,
        "not in DCM at the clock edge"
    );
}

#[test]
fn closed_loop_alternating_mode_period_is_two_clocks() {
    let mut d = demo_design();
    d.reset = ResetScheme::TwoSwitch {
        high_side: primary_switch(),
        clamp_diode: reset_diode(),
    };
    let mut spec = demo_controller();
    spec.mode = OutputMode::Alternating;
    spec.oscillator.frequency = 2.0 * DEMO_FREQUENCY;
    let mut map = ClosedLoopMap::new(&d, &spec, trial_options(spec.clock_period())).unwrap();
    assert!((map.period() - 1.0 / DEMO_FREQUENCY).abs() < 1e-15);
    agree(&mut map, "closed alternating");
}

#[test]
fn rcd_clamp() {
    let mut d = demo_design();
    d.reset = ResetScheme::RcdClamp {
        diode: reset_diode(),
        resistance: 1e3,
        capacitor: Capacitor {
            capacitance: 100e-9,
            esr: 0.0,
        },
        initial_voltage: 0.0,
    };
    let s = agree(&mut open(&d, gate(0.35, 0.0)), "rcd clamp");
    assert!(s.get("clamp.c").unwrap().abs() > 5.0, "clamp not charged");
}

#[test]
fn two_switch() {
    let mut d = demo_design();
    d.reset = ResetScheme::TwoSwitch {
        high_side: primary_switch(),
        clamp_diode: reset_diode(),
    };
    agree(&mut open(&d, gate(0.35, 0.0)), "two-switch");
}

#[test]
fn active_clamp() {
    // As in forward_clamps.rs: body diodes and Coss carry the magnetising current
    // through the dead times; 1 Ω ESR damps the Lm–C resonance.
    let body = Diode {
        vf: 0.7,
        rd: 0.02,
        r_off: 1e7,
        junction_capacitance: 0.0,
        reverse_rating: 100.0,
    };
    let mut d = demo_design();
    d.switch.body_diode = Some(body.clone());
    d.switch.output_capacitance = 200e-12;
    let mut aux = primary_switch();
    aux.body_diode = Some(body);
    d.reset = ResetScheme::ActiveClamp {
        aux_switch: aux,
        capacitor: Capacitor {
            capacitance: 470e-9,
            esr: 1.0,
        },
        initial_voltage: 0.0,
    };
    let s = agree(&mut open(&d, gate(0.3, 100e-9)), "active clamp");
    // Volt-second balance: Vc ≈ Vin·D/(1 − D) = 10.3 V (Erickson & Maksimović §6.3.2,
    // from memory); 5 % for the dead times and drops.
    let vc = s.get("clamp.c").unwrap().abs();
    assert!(
        (vc - 24.0 * 0.3 / 0.7).abs() < 0.05 * 10.3,
        "clamp at {vc} V"
    );
}

#[test]
fn newton_gains_at_least_two_digits_per_iteration_near_the_solution() {
    // With a difference Jacobian refined by Broyden updates the convergence is
    // superlinear, not quadratic (Dennis & Moré, "Quasi-Newton methods, motivation and
    // theory", SIAM Review 19, 1977, from memory): the Jacobian's relative error of
    // about 1e-3 from the 1e-6 perturbation bounds the ratio of successive residuals
    // near the solution by about 1e-3, so each of the last two iterations must cut the
    // residual by at least 100, and the last ratio must not be worse than the one
    // before by more than that 1e-3 error allows.
    let spec = demo_controller();
    let mut map =
        ClosedLoopMap::new(&demo_design(), &spec, trial_options(spec.clock_period())).unwrap();
    let s = shoot(&mut map, &ShootingOptions::default()).unwrap();
    let h = &s.history;
    println!("residual history {h:?}");
    assert!(h.len() >= 3, "too few iterations to judge: {h:?}");
    let n = h.len();
    assert!(h[n - 1] <= 1.0);
    let (r1, r2) = (h[n - 2] / h[n - 3], h[n - 1] / h[n - 2]);
    assert!(r1 < 1e-2 && r2 < 1e-2, "ratios {r1:e}, {r2:e}");
    assert!(s.spectral_radius < 1.0, "the steady orbit is stable");
}

#[test]
fn a_named_state_that_does_not_exist_lists_the_valid_names() {
    let map = open(&demo_design(), gate(0.35, 0.0));
    let mut x = map.initial();
    let err = place(map.names(), &[("lot".into(), 1.0)], &mut x).unwrap_err();
    let text = err.to_string();
    assert!(text.contains("'lot'"));
    assert!(text.contains("lout (inductor current, A)"), "{text}");
    assert!(text.contains("cout (capacitor voltage, V)"), "{text}");
    place(map.names(), &[("lout".into(), 2.5)], &mut x).unwrap();
    assert_eq!(
        x[map.names().iter().position(|n| n.name == "lout").unwrap()],
        2.5
    );
}

#[test]
fn no_convergence_names_the_states() {
    // One Newton iteration with no retries cannot settle the closed loop from its
    // averaged start: the error must say so and name states, not return a point.
    let spec = demo_controller();
    let mut map =
        ClosedLoopMap::new(&demo_design(), &spec, trial_options(spec.clock_period())).unwrap();
    let opts = ShootingOptions {
        max_newton: 0,
        retries: 0,
        fallback_periods: 1,
        ..ShootingOptions::default()
    };
    match shoot(&mut map, &opts) {
        Err(SteadyError::NotConverged {
            states, residual, ..
        }) => {
            assert!(residual > 1.0);
            assert!(!states.is_empty());
        }
        other => panic!("expected NotConverged, got {other:?}"),
    }
}

/// A one-state map with the shape of a period map, to pin down how the search sorts
/// out what it finds: the logistic map x ↦ r·x·(1 − x) (May, "Simple mathematical
/// models with very complicated dynamics", Nature 261, 1976). Its fixed point
/// 1 − 1/r has multiplier 2 − r: stable for r < 3; for 3 < r < 1 + √6 ≈ 3.449 the
/// orbit of period 2 is stable instead; at r = 3.9 the map is chaotic.
struct Logistic {
    r: f64,
    names: Vec<stepflux_models::steady::names::StateName>,
}

impl Logistic {
    fn new(r: f64) -> Self {
        use stepflux_models::steady::names::{StateClass, StateName};
        Logistic {
            r,
            names: vec![StateName {
                name: "x".into(),
                class: StateClass::Voltage,
            }],
        }
    }
}

impl PeriodMap for Logistic {
    fn names(&self) -> &[stepflux_models::steady::names::StateName] {
        &self.names
    }
    fn period(&self) -> f64 {
        1.0
    }
    fn initial(&self) -> Vec<f64> {
        vec![0.3]
    }
    fn run_from(
        &mut self,
        x0: &[f64],
        periods: usize,
        _cycles: &mut dyn stepflux_models::cycles::CycleSink,
    ) -> Result<Vec<f64>, stepflux_models::ModelError> {
        let mut x = x0[0];
        for _ in 0..periods {
            x = self.r * x * (1.0 - x);
        }
        Ok(vec![x])
    }
}

#[test]
fn a_stable_fixed_point_is_the_steady_state() {
    // r = 2.5: fixed point 0.6, multiplier −0.5.
    let s = shoot(&mut Logistic::new(2.5), &ShootingOptions::default()).unwrap();
    assert!((s.x[0] - 0.6).abs() < 1e-9);
    assert!((s.spectral_radius - 0.5).abs() < 1e-3);
}

#[test]
fn period_two_operation_is_reported_as_subharmonic_not_as_a_steady_state() {
    // r = 3.2: Newton on P finds the unstable fixed point 0.6875 (multiplier −1.2);
    // the orbit of period 2 is {0.5130, 0.7995} (roots of r²x² − r(r+1)x + r + 1 = 0).
    match shoot(&mut Logistic::new(3.2), &ShootingOptions::default()) {
        Err(SteadyError::Subharmonic {
            order,
            states,
            orbit,
        }) => {
            assert_eq!(order, 2);
            assert_eq!(states, vec!["x".to_string()]);
            let mut pts = [orbit[0][0], orbit[1][0]];
            pts.sort_by(f64::total_cmp);
            let r: f64 = 3.2;
            let disc = ((r + 1.0) * (r - 3.0)).sqrt();
            let lo = (r + 1.0 - disc) / (2.0 * r);
            let hi = (r + 1.0 + disc) / (2.0 * r);
            assert!(
                (pts[0] - lo).abs() < 1e-6 && (pts[1] - hi).abs() < 1e-6,
                "{pts:?}"
            );
        }
        other => panic!("expected period 2, got {other:?}"),
    }
}

#[test]
fn chaotic_operation_is_reported_as_no_steady_state() {
    match shoot(&mut Logistic::new(3.9), &ShootingOptions::default()) {
        Err(SteadyError::NotConverged {
            spectral_radius, ..
        }) => {
            // The fixed point 1 − 1/3.9 was found but is unstable (|2 − r| = 1.9).
            assert!(spectral_radius.is_some_and(|rho| rho > 1.0));
        }
        other => panic!("expected no steady state, got {other:?}"),
    }
}
