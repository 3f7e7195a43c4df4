//! `stepflux size`: a complete scenario from a specification (input range, output
//! voltage and current, switching frequency, reset scheme, ripple), sized by
//! [`stepflux_models::sizing`], every choice explained in the file's `design_notes`,
//! then checked like any scenario file.

use std::path::Path;

use anyhow::{bail, Context};
use stepflux_models::sizing::{self, ResetScheme, Sized, SizingSpec};

use crate::eng::eng;
use crate::exit::{Exit, ExitWith, Failure};
use crate::units::{self, Unit};

/// The specification as typed on the command line.
pub struct SizeArgs<'a> {
    /// Input range "A..B" (e.g. "36V..72V").
    pub vin: &'a str,
    pub vout: &'a str,
    pub iout: &'a str,
    pub frequency: &'a str,
    /// "reset-winding" or "two-switch".
    pub reset: &'a str,
    /// Output ripple target; default 1 % of the output voltage.
    pub ripple: Option<&'a str>,
    pub output: &'a Path,
}

/// Writes the sized scenario to `args.output`, then runs `check` on it.
pub fn size(args: &SizeArgs<'_>) -> Result<(), Failure> {
    let spec = spec(args).exit_with(Exit::BadInput)?;
    let sized = sizing::size(&spec)
        .context("the specification cannot be sized")
        .exit_with(Exit::BadInput)?;
    let name = args
        .output
        .file_stem()
        .and_then(|s| s.to_str())
        .unwrap_or("sized")
        .to_string();
    let text = scenario_text(&name, &spec, &sized);
    crate::writers::atomic::write_atomic(args.output, text.as_bytes())
        .with_context(|| format!("writing {}", args.output.display()))
        .exit_with(Exit::SimulationFailed)?;
    println!("wrote {}", args.output.display());
    crate::check::check(args.output, false, false)
}

fn value(flag: &str, text: &str, unit: Unit) -> anyhow::Result<f64> {
    units::parse(text, unit).with_context(|| format!("{flag} {text:?}"))
}

fn spec(a: &SizeArgs<'_>) -> anyhow::Result<SizingSpec> {
    let (lo, hi) = match a.vin.split_once("..") {
        Some((lo, hi)) => (lo, hi),
        None => (a.vin, a.vin),
    };
    let vout = value("--vout", a.vout, Unit::Volt)?;
    let reset = match a.reset {
        "reset-winding" => ResetScheme::ResetWinding,
        "two-switch" => ResetScheme::TwoSwitch,
        other => bail!(
            "--reset {other:?}: sizing knows reset-winding and two-switch (rcd-clamp and \
             active-clamp need a clamp design of their own)"
        ),
    };
    Ok(SizingSpec {
        vin_min: value("--vin", lo, Unit::Volt)?,
        vin_max: value("--vin", hi, Unit::Volt)?,
        vout,
        iout: value("--iout", a.iout, Unit::Ampere)?,
        frequency: value("--frequency", a.frequency, Unit::Hertz)?,
        reset,
        ripple: match a.ripple {
            Some(t) => value("--ripple", t, Unit::Volt)?,
            None => 0.01 * vout,
        },
    })
}

/// A round sample interval (1, 2 or 5 × a power of ten) of at least 40 samples a
/// period, so the waveforms show each pulse; no figure depends on it.
fn sample_interval(frequency: f64) -> f64 {
    let most = 1.0 / (40.0 * frequency);
    let decade = 10f64.powf(most.log10().floor());
    [5.0, 2.0, 1.0]
        .iter()
        .map(|m| m * decade)
        .find(|dt| *dt <= most)
        .unwrap_or(decade)
}

/// A JSON string literal.
fn q(text: &str) -> String {
    serde_json::Value::String(text.to_string()).to_string()
}

/// A value for a scenario field: engineering notation with the unit, e.g. "24.2 µH".
fn v(value: f64, unit: &str) -> String {
    q(&eng(value, unit))
}

fn reset_block(spec: &SizingSpec, s: &Sized) -> String {
    match (spec.reset, s.reset_turns) {
        (ResetScheme::ResetWinding, Some(nr)) => format!(
            r#"{{ "reset-winding": {{ "turns": {nr}, "diode": {{ "vf": "0.7 V", "rd": "0.1 Ω", "reverse_rating": {} }} }} }}"#,
            v(s.switch_rating, "V")
        ),
        _ => format!(
            r#"{{ "two-switch": {{ "high_side": {{ "r_on": "50 mΩ", "voltage_rating": {r} }}, "clamp_diode": {{ "vf": "0.7 V", "rd": "0.1 Ω", "reverse_rating": {r} }} }} }}"#,
            r = v(s.switch_rating, "V")
        ),
    }
}

fn notes_block(s: &Sized) -> String {
    let lines: Vec<String> = s
        .notes
        .iter()
        .map(|(field, why)| format!("    {}: {}", q(field), q(why)))
        .collect();
    lines.join(",\n")
}

/// The scenario file: the sized values, fixed parts the sizing assumes (diodes,
/// switch resistance, amplifiers) and limits the run is judged by.
pub fn scenario_text(name: &str, spec: &SizingSpec, s: &Sized) -> String {
    let diode = format!(
        r#"{{ "vf": "{} V", "rd": "10 mΩ", "r_off": "1 MΩ", "reverse_rating": {} }}"#,
        sizing::assumed::DIODE_VF,
        v(s.diode_rating, "V")
    );
    let amplifier = r#"{ "dc_gain": "10k", "gain_bandwidth": "1 MHz", "output_low": "0 V", "output_high": "3.5 V" }"#;
    let description = format!(
        "Sized by stepflux size: {} to {} V at {} A, {} kHz, {} reset, ripple {} p-p. A first cut \
         from textbook relations (Erickson & Maksimović, Fundamentals of Power Electronics: \
         forward converter §6.3.2, voltage-mode control chapter 9); design_notes gives the reason \
         for each value. Simulated at the middle of the input range from a cold start.",
        format_args!("{}..{} V", spec.vin_min, spec.vin_max),
        spec.vout,
        spec.iout,
        spec.frequency / 1e3,
        match spec.reset {
            ResetScheme::ResetWinding => "reset-winding",
            ResetScheme::TwoSwitch => "two-switch",
        },
        eng(spec.ripple, "V"),
    );
    let fs = spec.frequency;
    format!(
        r#"{{
  "$schema": "stepflux.schema.json",
  "name": {name},
  "description": {description},
  "design_notes": {{
{notes}
  }},
  "converter": {{
    "input": {{ "voltage": {vin} }},
    "transformer": {{
      "primary_turns": {np},
      "secondary_turns": {ns},
      "magnetising_inductance": {lm},
      "core_area": {ae},
      "saturation_flux_density": {bsat}
    }},
    "switch": {{ "r_on": "50 mΩ", "r_off": "10 MΩ", "voltage_rating": {rating} }},
    "reset": {reset},
    "rectifier": {diode},
    "freewheel": {diode},
    "output_inductor": {{ "inductance": {l}, "dcr": "10 mΩ", "saturation_current": {isat} }},
    "output_capacitor": {{ "capacitance": {c}, "esr": {esr} }},
    "load": {{ "resistance": {rload} }}
  }},
  "drive": {{
    "controller": {{
      "oscillator": {{ "frequency": {fsw}, "valley": "{valley} V", "peak": "{peak} V" }},
      "mode": "single_ended",
      "max_duty": {dmax},
      "soft_start": "1 ms",
      "voltage_loop": {{
        "reference": "{vref} V",
        "reference_soft_start": "1 ms",
        "divider_top": {rtop},
        "divider_bottom": {rbot},
        "amplifier": {amplifier},
        "compensation": {{
          "poles_zeros": {{
            "r1": {r1},
            "integrator": {fi},
            "zeros": [{z0}, {z1}],
            "poles": [{p0}, {p1}]
          }}
        }}
      }},
      "current_limit": {{
        "sense_gain": "0.1 V/A",
        "threshold": {threshold},
        "amplifier": {amplifier},
        "compensation": {{ "type1": {{ "r1": "10k", "c1": "1 nF" }} }}
      }},
      "blanking": "150 ns",
      "gate_delay": "50 ns"
    }}
  }},
  "analysis": {{ "stop_time": "5 ms", "sample_interval": {dt} }},
  "limits": {{
    "startup_overshoot_percent": 5,
    "startup_time": "4 ms",
    "ripple": {ripple},
    "reset_margin_percent": 5,
    "flux_margin_percent": 20
  }}
}}
"#,
        name = q(name),
        description = q(&description),
        notes = notes_block(s),
        vin = v(s.vin_nominal, "V"),
        np = s.primary_turns,
        ns = s.secondary_turns,
        lm = v(s.magnetising_inductance, "H"),
        ae = q(&format!("{} mm2", sizing::assumed::CORE_AREA * 1e6)),
        bsat = v(sizing::assumed::BSAT, "T"),
        rating = v(s.switch_rating, "V"),
        reset = reset_block(spec, s),
        l = v(s.inductance, "H"),
        isat = v(s.saturation_current, "A"),
        c = v(s.capacitance, "F"),
        esr = v(s.esr, "Ω"),
        rload = v(s.load_resistance, "Ω"),
        fsw = v(fs, "Hz"),
        valley = sizing::assumed::RAMP.0,
        peak = sizing::assumed::RAMP.1,
        dmax = sizing::MAX_DUTY,
        vref = sizing::assumed::REFERENCE,
        rtop = v(s.divider_top, "Ω"),
        rbot = v(sizing::assumed::DIVIDER_BOTTOM, "Ω"),
        r1 = v(sizing::assumed::R1, "Ω"),
        fi = v(s.integrator, "Hz"),
        z0 = v(s.zeros[0], "Hz"),
        z1 = v(s.zeros[1], "Hz"),
        p0 = v(s.poles[0], "Hz"),
        p1 = v(s.poles[1], "Hz"),
        threshold = v(0.1 * s.current_limit, "V"),
        dt = v(sample_interval(fs), "s"),
        ripple = v(spec.ripple, "V"),
    )
}
