//! A demonstration design of this project's own invention (not a product): an
//! 18–36 V industrial bus to an isolated 5 V, 4 A rail at 150 kHz with a reset winding.
//! The values are invented for examples and demos only; they are plausible, not
//! optimised, and carry no claim about any real part.

use crate::components::{
    Capacitor, CoreLoss, Diode, GateDrive, Inductor, InputSource, Load, Switch, Transformer,
    Transitions,
};
use crate::controller::{
    Amplifier, Compensation, ControllerSpec, CurrentLimit, Lockout, Oscillator, OutputMode,
    VoltageLoop,
};
use crate::template::{ForwardDesign, ResetScheme};

/// Switching frequency of the demo design, hertz.
pub const DEMO_FREQUENCY: f64 = 150e3;

/// Nominal input of the demo design, volts.
pub const DEMO_VIN: f64 = 24.0;

/// A small-signal diode for the reset winding.
pub fn reset_diode() -> Diode {
    Diode {
        vf: 0.7,
        rd: 0.1,
        r_off: 1e7,
        junction_capacitance: 0.0,
        reverse_rating: 100.0,
    }
}

/// A low-drop power rectifier.
pub fn power_diode() -> Diode {
    Diode {
        vf: 0.4,
        rd: 0.01,
        r_off: 1e6,
        junction_capacitance: 0.0,
        reverse_rating: 45.0,
    }
}

/// The primary switch.
pub fn primary_switch() -> Switch {
    Switch {
        r_on: 0.05,
        r_off: 1e7,
        output_capacitance: 0.0,
        body_diode: None,
        voltage_rating: 100.0,
        transitions: None,
        gate_drive: None,
    }
}

/// The demo's main switch with its invented switching figures: 20 ns rise, 30 ns fall,
/// 15 nC of gate charge from a 10 V driver.
pub fn demo_main_switch() -> Switch {
    Switch {
        transitions: Some(Transitions::Times {
            rise_time: 20e-9,
            fall_time: 30e-9,
        }),
        gate_drive: Some(GateDrive {
            charge: 15e-9,
            drive_voltage: 10.0,
        }),
        ..primary_switch()
    }
}

/// The demo converter: Np:Ns:Nr = 12:9:12, Lm = 200 µH, Ae = 40 mm², Bsat = 0.3 T,
/// 15 µH / 220 µF output, 1.25 Ω load (4 A at 5 V).
pub fn demo_design() -> ForwardDesign {
    ForwardDesign {
        input: InputSource {
            voltage: DEMO_VIN,
            resistance: 0.0,
            filter: None,
            bulk: None,
        },
        transformer: Transformer {
            primary_turns: 12.0,
            secondary_turns: 9.0,
            reset_turns: 12.0,
            magnetising_inductance: 200e-6,
            primary_leakage: 0.0,
            secondary_leakage: 0.0,
            reset_leakage: 0.0,
            primary_resistance: 0.0,
            secondary_resistance: 0.0,
            reset_resistance: 0.0,
            core_area: 40e-6,
            saturation_flux_density: 0.3,
            saturated_inductance: None,
            // Invented ferrite-like coefficients: about 120 kW/m³ at 150 kHz and 100 mT.
            core_loss: Some(CoreLoss {
                k: 2.2,
                alpha: 1.4,
                beta: 2.5,
                volume: 1.6e-6,
            }),
        },
        switch: demo_main_switch(),
        reset: ResetScheme::ResetWinding {
            diode: reset_diode(),
        },
        rectifier: power_diode(),
        freewheel: power_diode(),
        output_inductor: Inductor {
            inductance: 15e-6,
            dcr: 0.01,
            saturation_current: 8.0,
        },
        output_capacitor: Capacitor {
            capacitance: 220e-6,
            esr: 0.02,
        },
        load: Load {
            resistance: Some(1.25),
            current: None,
        },
    }
}

/// An error amplifier of ordinary data-sheet figures: 80 dB, 1 MHz, 0–3.5 V output.
pub fn demo_amplifier() -> Amplifier {
    Amplifier {
        dc_gain: 1e4,
        gain_bandwidth: 1e6,
        output_low: 0.0,
        output_high: 3.5,
    }
}

/// The demo controller: 150 kHz clock, 1–3 V ramp, 45 % duty clamp, 1 ms duty soft
/// start, 2.5 V reference with a 1 ms soft start (as long as the duty soft start, so
/// the reference keeps pace and the output rises monotonically; 3 ms made the two
/// fight, see `scenarios/startup-fighting-soft-starts.json`) and a 1:1 divider for 5 V, type III compensation for a 15 kHz
/// crossover (double zero near the output LC resonance of 2.8 kHz, poles at the
/// output capacitor's ESR zero and at half the switching frequency), 8 A current
/// limit, 16 V / 15 V lockout.
pub fn demo_controller() -> ControllerSpec {
    ControllerSpec {
        oscillator: Oscillator {
            frequency: DEMO_FREQUENCY,
            valley: 1.0,
            peak: 3.0,
        },
        mode: OutputMode::SingleEnded,
        max_duty: 0.45,
        soft_start: 1e-3,
        voltage_loop: VoltageLoop {
            reference: 2.5,
            reference_soft_start: 1e-3,
            divider_top: 10e3,
            divider_bottom: 10e3,
            amplifier: demo_amplifier(),
            compensation: Compensation::PolesZeros {
                r1: 10e3,
                integrator_hz: 2600.0,
                zeros_hz: vec![2000.0, 3000.0],
                poles_hz: vec![36e3, 75e3],
            },
        },
        current_limit: Some(CurrentLimit {
            sense_gain: 0.1,
            threshold: 0.8,
            amplifier: demo_amplifier(),
            compensation: Compensation::TypeI { r1: 10e3, c1: 1e-9 },
        }),
        blanking: 150e-9,
        min_on_time: 0.0,
        gate_delay: 50e-9,
        lockout: Some(Lockout {
            start: 16.0,
            stop: 15.0,
        }),
        aux_dead_time: 100e-9,
        isolated: None,
    }
}
