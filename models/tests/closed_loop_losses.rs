//! The loss breakdown of a closed-loop converter: it accounts for all of the input
//! power, its parts agree with textbook conduction-loss relations, and efficiency with a
//! fixed controller bias falls at light load.
//!
//! Energy balance (Tellegen's theorem: the absorbed powers of all branches of a circuit
//! sum to zero; B. D. H. Tellegen, "A general network theorem, with applications",
//! Philips Res. Rep. 7, 1952): over a window, E_in = E_out + Σ losses + ΔE_stored. The
//! stored-energy change is accounted for exactly (½·L·i² and ½·C·v² of every power-stage
//! inductor and capacitor read from the state at both window ends), not assumed away,
//! so the window need not be an exact steady state. Required: the breakdown sums to
//! P_in − P_out − dE/dt within 0.1 % of P_in (the figure). The meters are exact
//! integrals, so the remaining error is rounding (~1e-7 here); a missing element
//! (its class not metered) or a wrong sign would show at the percent level.

mod closed_loop_rig;

use closed_loop_rig::*;
use stepflux_models::components::Capacitor;
use stepflux_models::demo_design::{demo_controller, demo_design, power_diode, DEMO_FREQUENCY};
use stepflux_models::measure::{CossTurnOn, LossClass, LossReport, Measurement, Ripple};
use stepflux_models::template::ForwardDesign;

/// Settles the loop, then reports losses and the inductor current over 60 periods.
fn steady_losses(design: &ForwardDesign, t_settle: f64) -> (LossReport, f64, f64) {
    let spec = demo_controller();
    let mut rig = Rig::new(design, &spec, &[], 1e-6);
    rig.run(t_settle, vec![], &mut NoCycles);
    let a = rig.ledger.snapshot(&rig.cl.run.sim).unwrap();
    let t_end = t_settle + periods(60.0, DEMO_FREQUENCY);
    let probes = rig.cl.run.probes().to_vec();
    let mut il = Ripple::new(&probes, "lout.i", a.time, t_end).unwrap();
    let mut coss = CossTurnOn::new(rig.ledger.main_switch_coss(), a.time, t_end);
    rig.run(t_end, vec![&mut il, &mut coss], &mut NoCycles);
    let b = rig.ledger.snapshot(&rig.cl.run.sim).unwrap();
    let report = LossReport::between(&rig.ledger, &a, &b, coss.energy()).unwrap();
    for f in report
        .figures(0.0)
        .iter()
        .chain(&il.figures())
        .chain(&coss.figures())
    {
        println!("{f}");
    }
    let il = il.result().unwrap();
    (report, il.mean, il.peak_to_peak)
}

/// The demo with every parasitic class present: winding resistances, switch output
/// capacitance and body diode, source resistance and a bulk capacitor with ESR.
fn lossy_demo() -> ForwardDesign {
    let mut d = demo_design();
    d.switch.output_capacitance = 200e-12;
    d.switch.body_diode = Some(power_diode());
    d.transformer.primary_resistance = 0.05;
    d.transformer.secondary_resistance = 0.01;
    d.transformer.reset_resistance = 0.2;
    d.input.resistance = 0.05;
    d.input.bulk = Some(Capacitor {
        capacitance: 10e-6,
        esr: 0.05,
    });
    d
}

#[test]
fn breakdown_sums_to_input_minus_output_and_matches_conduction_formulas() {
    let design = lossy_demo();
    let (r, i_mean, i_pp) = steady_losses(&design, 5e-3);
    let (p_in, p_out) = (r.input_power(), r.output_power());
    let accounted = r.loss_power() + r.stored_power();
    let balance = (p_in - p_out - accounted) / p_in;
    println!(
        "P_in {p_in:.6} W, P_out {p_out:.6} W, losses {:.6} W, dE/dt {:.3e} W, balance {balance:.2e} of P_in",
        r.loss_power(),
        r.stored_power()
    );
    assert!(balance.abs() < 1e-3, "breakdown misses {balance:e} of P_in");
    // Every class this design has must show up with a loss.
    for c in [
        LossClass::Switch,
        LossClass::Diode,
        LossClass::Winding,
        LossClass::InductorDcr,
        LossClass::CapacitorEsr,
        LossClass::InputStage,
        LossClass::FeedbackDivider,
    ] {
        assert!(r.class_power(c) > 0.0, "class {} has no loss", c.name());
    }
    assert!(r.coss_turn_on > 0.0 && r.switch_conduction_power() > 0.0);

    // Conduction in a diode modelled as Vf in series with Rd: Vf·⟨i⟩ + Rd·⟨i²⟩
    // (Erickson & Maksimović, Fundamentals of Power Electronics, 2nd ed., ch. 3,
    // diode conduction model (from memory)). Rectifier and freewheel together carry
    // the output inductor current at every instant (no secondary leakage, so they
    // commutate at once), whose mean square for a triangular ripple ΔI about ⟨i⟩ is
    // ⟨i⟩² + ΔI²/12 (Erickson & Maksimović ch. 2 / appendix on RMS values (from memory)).
    // Tolerance 0.5 %: the off diodes' leakage (|v|²/1 MΩ ≈ 0.3 mW, 0.02 %) and the
    // ripple not being exactly triangular (capacitor voltage moves a little within a
    // period) are well inside it; a misclassified or mis-signed meter is not.
    let d = &design.rectifier;
    let mean_square = i_mean * i_mean + i_pp * i_pp / 12.0;
    let output_diodes = element_power(&r, "rect.d") + element_power(&r, "fw.d");
    let expected = d.vf * i_mean + d.rd * mean_square;
    println!("output diodes {output_diodes:.6} W, closed form {expected:.6} W");
    assert!(((output_diodes - expected) / expected).abs() < 5e-3);
    // The same current through the inductor's resistance: DCR·⟨i²⟩ (Joule).
    let dcr = r.class_power(LossClass::InductorDcr);
    let expected = design.output_inductor.dcr * mean_square;
    println!("inductor DCR {dcr:.6} W, closed form {expected:.6} W");
    assert!(((dcr - expected) / expected).abs() < 5e-3);
}

fn element_power(r: &LossReport, name: &str) -> f64 {
    r.elements
        .iter()
        .find(|e| e.0 == name)
        .map(|e| e.2 / r.duration())
        .unwrap_or_else(|| panic!("no element {name}"))
}

#[test]
fn efficiency_with_controller_bias_falls_at_light_load() {
    // A fixed 0.3 W for the controller and gate drive: of the order of a PWM
    // controller's supply current times its supply voltage (common practice). It is a
    // constant draw, so at light load it is a larger share of the input.
    let bias = 0.3;
    let full = demo_design();
    let mut light = demo_design();
    light.load.resistance = Some(12.5); // 0.4 A instead of 4 A
    let (r_full, _, _) = steady_losses(&full, 5e-3);
    let (r_light, _, _) = steady_losses(&light, 5e-3);
    let (full_stage, full_total) = (r_full.efficiency(), r_full.efficiency_with_bias(bias));
    let (light_stage, light_total) = (r_light.efficiency(), r_light.efficiency_with_bias(bias));
    println!("4 A: stage {full_stage:.4}, with {bias} W bias {full_total:.4}");
    println!("0.4 A: stage {light_stage:.4}, with {bias} W bias {light_total:.4}");
    for (name, r) in [("4 A", &r_full), ("0.4 A", &r_light)] {
        let eta = r.efficiency_with_bias(bias);
        let direct = r.output_power() / (r.input_power() + bias);
        assert!((eta - direct).abs() < 1e-12, "{name}");
        assert!(eta < r.efficiency() && r.efficiency() < 1.0, "{name}");
    }
    assert!(
        light_total < full_total,
        "efficiency with bias did not fall at light load: {light_total} vs {full_total}"
    );
}
