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

use nalgebra::DMatrix;
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
    // Every iterate brought its exact Jacobian: no difference Jacobian was needed.
    assert_eq!(steady.work.differences, 0, "{label}: {:?}", steady.work);
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
    let s = agree(&mut rcd(), "rcd clamp");
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

/// The demo with an active clamp: body diodes and Coss carry the magnetising current
/// through the dead times (as in forward_clamps.rs); 1 Ω ESR damps the Lm–C resonance.
fn active_clamp_design() -> ForwardDesign {
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
    d
}

#[test]
fn active_clamp() {
    let s = agree(
        &mut open(&active_clamp_design(), gate(0.3, 100e-9)),
        "active clamp",
    );
    // Volt-second balance: Vc ≈ Vin·D/(1 − D) = 10.3 V (Erickson & Maksimović §6.3.2,
    // from memory); 5 % for the dead times and drops.
    let vc = s.get("clamp.c").unwrap().abs();
    assert!(
        (vc - 24.0 * 0.3 / 0.7).abs() < 0.05 * 10.3,
        "clamp at {vc} V"
    );
}

/// The active clamp under the controller: the auxiliary switch turns on a dead time
/// after the comparator's delayed turn-off, an instant that moves with the state.
fn closed_active_clamp() -> ClosedLoopMap {
    let spec = demo_controller();
    ClosedLoopMap::new(
        &active_clamp_design(),
        &spec,
        trial_options(spec.clock_period()),
    )
    .unwrap()
}

fn closed_ccm() -> ClosedLoopMap {
    let spec = demo_controller();
    ClosedLoopMap::new(&demo_design(), &spec, trial_options(spec.clock_period())).unwrap()
}

fn rcd() -> OpenLoopMap {
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
    open(&d, gate(0.35, 0.0))
}

/// The demo's core with its knee lowered to 0.2 A (0.083 T) and a saturated
/// inductance of Lm/20, so the magnetising current passes the knee in every period
/// (its unsaturated peak is Vin·D·T/Lm = 0.28 A): the knee's events and the saturation
/// branch's switching are part of the orbit.
fn saturating() -> (OpenLoopMap, f64) {
    let mut d = demo_design();
    d.transformer.saturation_flux_density = 0.083;
    d.transformer.saturated_inductance = Some(d.transformer.magnetising_inductance / 20.0);
    let knee = d.transformer.knee_current();
    (open(&d, gate(0.35, 0.0)), knee)
}

/// Highest magnetising current of the cycles a run hands over.
struct PeakMag(f64);

impl stepflux_models::cycles::CycleSink for PeakMag {
    fn cycle(&mut self, record: &stepflux_models::cycles::CycleRecord) {
        self.0 = self.0.max(record.mag_current_peak);
    }
}

#[test]
fn saturating_core() {
    let (mut map, knee) = saturating();
    let s = agree(&mut map, "saturating core");
    let mut peak = PeakMag(f64::NEG_INFINITY);
    map.run_from(&s.x, 1, &mut peak).unwrap();
    assert!(peak.0 > knee, "peak {} below the knee {knee}", peak.0);
}

fn open_dcm() -> OpenLoopMap {
    let mut d = demo_design();
    d.load.resistance = Some(20.0);
    open(&d, gate(0.35, 0.0))
}

fn closed_dcm() -> ClosedLoopMap {
    let mut d = demo_design();
    d.load.resistance = Some(20.0);
    let spec = demo_controller();
    ClosedLoopMap::new(&d, &spec, trial_options(spec.clock_period())).unwrap()
}

fn closed_alternating() -> ClosedLoopMap {
    let mut d = demo_design();
    d.reset = ResetScheme::TwoSwitch {
        high_side: primary_switch(),
        clamp_diode: reset_diode(),
    };
    let mut spec = demo_controller();
    spec.mode = OutputMode::Alternating;
    spec.oscillator.frequency = 2.0 * DEMO_FREQUENCY;
    ClosedLoopMap::new(&d, &spec, trial_options(spec.clock_period())).unwrap()
}

/// ∂P/∂x by central differences, h_j = 1e-6·max(|x_j|, 1).
fn central_differences<M: PeriodMap>(map: &mut M, x: &[f64]) -> DMatrix<f64> {
    let n = x.len();
    let mut j = DMatrix::zeros(n, n);
    for c in 0..n {
        let h = 1e-6 * x[c].abs().max(1.0);
        let (mut up, mut down) = (x.to_vec(), x.to_vec());
        up[c] += h;
        down[c] -= h;
        let (fu, fd) = (map.apply(&up).unwrap(), map.apply(&down).unwrap());
        for r in 0..n {
            j[(r, c)] = (fu[r] - fd[r]) / (2.0 * h);
        }
    }
    j
}

/// The exact Jacobian of one period at the steady state against central differences.
fn exact_agrees_with_differences<M: PeriodMap>(mut map: M, label: &str) {
    let x = shoot(&mut map, &ShootingOptions::default()).unwrap().x;
    let (_, exact) = map.run_with_jacobian(&x, 1).unwrap();
    let exact = exact.unwrap_or_else(|| panic!("{label}: no exact Jacobian"));
    let fd = central_differences(&mut map, &x);
    // In units of each state's size: D⁻¹·J·D, D = diag(max(|x|, 1)).
    let d: Vec<f64> = x.iter().map(|v| v.abs().max(1.0)).collect();
    let mut worst: f64 = 0.0;
    for r in 0..x.len() {
        for c in 0..x.len() {
            let e = (exact[(r, c)] - fd[(r, c)]).abs() * d[c] / d[r];
            worst = worst.max(e);
        }
    }
    println!("{label}: largest scaled difference {worst:.2e}\nexact {exact}differences {fd}");
    assert!(worst <= 1e-4, "{label}: exact {exact} differences {fd}");
}

#[test]
fn the_exact_jacobian_equals_central_differences() {
    // Specification: ∂P/∂x is the product of the step propagators with a saltation
    // matrix at each switching instant that moves with the state (Aprille & Trick,
    // Proc. IEEE 60(1), 1972, §III; Leine & Nijmeijer, "Dynamics and Bifurcations of
    // Non-smooth Mechanical Systems", Springer 2004, §3.5), and P is smooth between
    // the points where a crossing moves by a tick, so central differences converge to
    // it. Their error, in units of the states' sizes D: each trial's crossings move by
    // at most one tick q = 1e-12·T of the trial grid, a step of |f⁺ − f⁻|·q in a state,
    // ≤ 1e6 A/s (the output inductor's slope change, about Vin·n/L) · 6.7e-18 s ≈ 7e-12
    // A, over 2h = 2e-6·D: about 1e-6; the difference's own error h²·|P'''| and
    // round-off (1e-16·|x|/h = 1e-10) are smaller. So 1e-4 of the scaled entries: two
    // orders of margin over the difference error, and far below the entries themselves
    // (the saltation terms are of order one: leaving out a turn-off's changes the
    // output-filter column by tens of percent, see the engine's sensitivity tests).
    // Cases: every event kind the search meets — the comparator's delayed turn-off
    // and its ramp (∂g/∂t), the clamp, reset and rectifier diodes, DCM, the saturation
    // knee.
    exact_agrees_with_differences(closed_ccm(), "closed CCM");
    exact_agrees_with_differences(closed_dcm(), "closed DCM");
    exact_agrees_with_differences(closed_alternating(), "closed alternating");
    exact_agrees_with_differences(open_dcm(), "open DCM");
    exact_agrees_with_differences(rcd(), "rcd clamp");
    exact_agrees_with_differences(saturating().0, "saturating core");
    exact_agrees_with_differences(closed_active_clamp(), "closed active clamp");
}

/// Convergence order from three successive residuals: log(r₂/r₁) / log(r₁/r₀), 1 for
/// linear and 2 for quadratic convergence.
fn order(r: &[f64]) -> f64 {
    (r[2] / r[1]).ln() / (r[1] / r[0]).ln()
}

#[test]
fn newton_converges_quadratically_near_the_solution() {
    // Newton's method with the exact Jacobian converges quadratically near a regular
    // solution, |e_{k+1}| ≤ C·|e_k|² (Dennis & Schnabel, "Numerical Methods for
    // Unconstrained Optimization and Nonlinear Equations", SIAM 1996, Thm 5.2.1, from
    // memory), and the residual, ≈ (I − J)·e, with it. The sequence is judged down to
    // the tolerance (weighted norm 1): below it the residual meets the floor of the map
    // itself, where a step moves a crossing by a tick (about 5 nA in the output inductor
    // current, a norm of about 1) or round-off. On the last three residuals above that
    // floor: the order log(r₂/r₁)/log(r₁/r₀) must be at least 1.5 (2 in theory, 1 for
    // linear convergence), and one constant must bound both steps, r_{k+1} ≤ C·r_k²:
    // the two ratios r_{k+1}/r_k² within a factor 10 (linear convergence with ratio ρ
    // makes that ratio grow by 1/ρ per step, a factor of hundreds or more here). The
    // residual after them must be within tolerance.
    let opts = ShootingOptions::default();
    let cases: Vec<(&str, SteadyState)> = vec![
        ("closed CCM", shoot(&mut closed_ccm(), &opts).unwrap()),
        (
            "closed alternating",
            shoot(&mut closed_alternating(), &opts).unwrap(),
        ),
        ("rcd clamp", shoot(&mut rcd(), &opts).unwrap()),
        ("open DCM", shoot(&mut open_dcm(), &opts).unwrap()),
    ];
    for (label, s) in cases {
        let h = &s.history;
        println!("{label}: residual history {h:?}");
        let above: Vec<f64> = h.iter().copied().take_while(|&r| r > 1.0).collect();
        assert!(
            above.len() >= 3,
            "{label}: too few iterations to judge: {h:?}"
        );
        let last = &above[above.len() - 3..];
        let q = order(last);
        let (c0, c1) = (last[1] / (last[0] * last[0]), last[2] / (last[1] * last[1]));
        println!("{label}: order {q:.2}, r_k+1/r_k² {c0:.2e}, {c1:.2e}");
        assert!(q >= 1.5, "{label}: order {q} from {h:?}");
        assert!(
            c1 <= 10.0 * c0 && c0 <= 10.0 * c1,
            "{label}: {c0:e}, {c1:e}"
        );
        assert!(h[above.len()] <= 1.0, "{label}: {h:?}");
        assert_eq!(
            s.work.differences, 0,
            "{label}: a difference Jacobian was needed"
        );
        assert!(
            s.spectral_radius < 1.0,
            "{label}: the steady orbit is stable"
        );
    }
}

/// A map that hides its exact Jacobian, so the search falls back to differences.
struct WithoutJacobian<M>(M);

impl<M: PeriodMap> PeriodMap for WithoutJacobian<M> {
    fn names(&self) -> &[stepflux_models::steady::names::StateName] {
        self.0.names()
    }
    fn period(&self) -> f64 {
        self.0.period()
    }
    fn initial(&self) -> Vec<f64> {
        self.0.initial()
    }
    fn guess(&self) -> Vec<f64> {
        self.0.guess()
    }
    fn run_from(
        &mut self,
        x0: &[f64],
        periods: usize,
        cycles: &mut dyn stepflux_models::cycles::CycleSink,
    ) -> Result<Vec<f64>, stepflux_models::ModelError> {
        self.0.run_from(x0, periods, cycles)
    }
}

#[test]
fn without_an_exact_jacobian_the_search_falls_back_to_differences() {
    // The same fixed point whichever Jacobian Newton uses: both runs stop within the
    // tolerance (1e-9 relative, 1 nA / 1 nV) of it, so they agree to twice that.
    let opts = ShootingOptions::default();
    let exact = shoot(&mut closed_ccm(), &opts).unwrap();
    let fallback = shoot(&mut WithoutJacobian(closed_ccm()), &opts).unwrap();
    println!(
        "exact: {:?}, history {:?}; differences: {:?}, history {:?}",
        exact.work, exact.history, fallback.work, fallback.history
    );
    assert!(fallback.work.differences >= 1);
    assert_eq!(exact.work.differences, 0);
    let tol = opts.tolerance;
    for (k, n) in exact.names.iter().enumerate() {
        let (a, b) = (exact.x[k], fallback.x[k]);
        assert!(
            (a - b).abs() <= 2.0 * tol.scale(n.class, a),
            "{}: {a} vs {b}",
            n.name
        );
    }
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

/// The logistic map with its derivative, d/dx₀ of Pᵐ = Π r·(1 − 2·x_i) along the
/// orbit (chain rule), as a map that gives its exact Jacobian.
struct LogisticWithJacobian(Logistic);

impl PeriodMap for LogisticWithJacobian {
    fn names(&self) -> &[stepflux_models::steady::names::StateName] {
        self.0.names()
    }
    fn period(&self) -> f64 {
        1.0
    }
    fn initial(&self) -> Vec<f64> {
        self.0.initial()
    }
    fn run_from(
        &mut self,
        x0: &[f64],
        periods: usize,
        cycles: &mut dyn stepflux_models::cycles::CycleSink,
    ) -> Result<Vec<f64>, stepflux_models::ModelError> {
        self.0.run_from(x0, periods, cycles)
    }
    fn run_with_jacobian(
        &mut self,
        x0: &[f64],
        periods: usize,
    ) -> Result<(Vec<f64>, Option<DMatrix<f64>>), stepflux_models::ModelError> {
        let r = self.0.r;
        let (mut x, mut d) = (x0[0], 1.0);
        for _ in 0..periods {
            d *= r * (1.0 - 2.0 * x);
            x = r * x * (1.0 - x);
        }
        Ok((vec![x], Some(DMatrix::from_element(1, 1, d))))
    }
}

#[test]
fn with_the_exact_jacobian_the_residual_falls_with_newtons_constant() {
    // F(x) = P(x) − x for P(x) = r·x·(1 − x), r = 2.5: fixed point x* = 1 − 1/r = 0.6,
    // F'(x*) = P'(x*) − 1 = 1 − r, F'' = −2r. Newton's error obeys
    // e_{k+1} = F''/(2F')·e_k² + O(e³) (Dennis & Schnabel, SIAM 1996, §2.4, from
    // memory), so the residual |F| ≈ |F'|·|e| obeys |F_{k+1}| ≈ r/(r − 1)²·|F_k|²
    // = 1.11·|F_k|². In the search's weighted norm (residual over 1e-9·|x| + 1e-9 at
    // x ≈ 0.6, i.e. 1.6e-9) the constant is 1.11 · 1.6e-9. Checked to 2 % on every
    // step from a residual below 1e-3, where the neglected terms (relative size about
    // F''·e/F' = 3.3·e, e ≈ |F|/1.5) are under 0.3 %, to one above 1e-14, where the
    // round-off of F (1e-16 at x ≈ 0.6) is under 1 %.
    let r: f64 = 2.5;
    let s = shoot(
        &mut LogisticWithJacobian(Logistic::new(r)),
        &ShootingOptions::default(),
    )
    .unwrap();
    assert!((s.x[0] - 0.6).abs() < 1e-9);
    assert_eq!(s.work.differences, 0);
    let scale = 1e-9 * 0.6 + 1e-9;
    let expected = r / ((r - 1.0) * (r - 1.0)) * scale;
    let h = &s.history;
    println!("history {h:?}, constant expected {expected:e}");
    let mut checked = 0;
    for k in 0..h.len() - 1 {
        let residual = h[k] * scale;
        if residual < 1e-3 && h[k + 1] * scale > 1e-14 {
            let c = h[k + 1] / (h[k] * h[k]);
            println!("step {k}: r_k+1/r_k² {c:e}");
            assert!(
                (c / expected - 1.0).abs() < 0.02,
                "step {k}: {c:e} vs {expected:e}"
            );
            checked += 1;
        }
    }
    assert!(checked >= 2, "too few steps in the quadratic range: {h:?}");
}
