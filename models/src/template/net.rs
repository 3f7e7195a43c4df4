//! Building blocks shared by every template: an element with its parasitics, the input
//! stage and the secondary/output stage.

use stepflux_engine::{Circuit, ElementId, NodeId, Quantity, Signal, SwitchParams, Waveform};

use super::{ForwardDesign, Probe, UnitSymbol};
use crate::components::{Capacitor, Diode, InputSource, Switch};
use crate::error::ModelError;

/// A circuit under construction plus the probes named so far.
pub struct Net {
    circuit: Circuit,
    probes: Vec<Probe>,
}

/// Result of the input stage.
pub struct InputStage {
    /// Node feeding the converter.
    pub node: NodeId,
    /// The voltage source.
    pub source: ElementId,
}

/// Result of the output stage.
pub struct OutputStage {
    /// Forward rectifier.
    pub rectifier: ElementId,
    /// Freewheel diode.
    pub freewheel: ElementId,
    /// Output inductor.
    pub inductor: ElementId,
    /// Load current sink (0 A when the load has none, so steps can use it).
    pub load_sink: ElementId,
    /// Switch in series with the load resistor, if there is one.
    pub load_switch: Option<ElementId>,
}

/// Load-branch switch: 1 nΩ on, 1 TΩ off.
const LOAD_SWITCH: SwitchParams = SwitchParams {
    r_on: 1e-9,
    r_off: 1e12,
};

/// Resistance standing in for a zero-length connection, ohms: small against any winding.
const SMALL_RESISTANCE: f64 = 1e-6;

impl Net {
    /// An empty circuit.
    pub fn new() -> Self {
        Net {
            circuit: Circuit::new(),
            probes: Vec::new(),
        }
    }

    /// Continues building on an existing circuit.
    pub fn from_circuit(circuit: Circuit) -> Self {
        Net {
            circuit,
            probes: Vec::new(),
        }
    }

    /// The node of that name.
    pub fn node(&mut self, name: &str) -> NodeId {
        self.circuit.node(name)
    }

    /// Direct access for template-specific elements.
    pub fn circuit(&mut self) -> &mut Circuit {
        &mut self.circuit
    }

    /// Adds a probe.
    pub fn probe(&mut self, name: &str, signal: Signal, unit: UnitSymbol) {
        self.probes.push(Probe {
            name: name.to_string(),
            signal,
            unit,
        });
    }

    /// Takes the probes collected so far.
    pub fn take_probes(&mut self) -> Vec<Probe> {
        std::mem::take(&mut self.probes)
    }

    /// The finished circuit.
    pub fn into_circuit(self) -> Circuit {
        self.circuit
    }

    /// Resistance then inductance in series from `a` to `b`, each left out when zero.
    /// Returns the inductor, if any.
    pub fn series_rl(
        &mut self,
        name: &str,
        a: NodeId,
        b: NodeId,
        ohms: f64,
        henries: f64,
    ) -> Result<Option<ElementId>, ModelError> {
        let mid = if ohms > 0.0 && henries > 0.0 {
            self.node(&format!("{name}.mid"))
        } else {
            b
        };
        if ohms > 0.0 {
            self.circuit.resistor(&format!("{name}.r"), a, mid, ohms)?;
        }
        if henries > 0.0 {
            let from = if ohms > 0.0 { mid } else { a };
            return Ok(Some(self.circuit.inductor(
                &format!("{name}.l"),
                from,
                b,
                henries,
                0.0,
            )?));
        }
        if ohms == 0.0 {
            // Neither: a near-short keeps the two named nodes distinct.
            self.circuit
                .resistor(&format!("{name}.r"), a, b, SMALL_RESISTANCE)?;
        }
        Ok(None)
    }

    /// A capacitor with its ESR from `a` to `b`; returns the capacitor.
    pub fn capacitor(
        &mut self,
        name: &str,
        a: NodeId,
        b: NodeId,
        c: &Capacitor,
        v0: f64,
    ) -> Result<ElementId, ModelError> {
        let top = if c.esr > 0.0 {
            let mid = self.node(&format!("{name}.esr"));
            self.circuit
                .resistor(&format!("{name}.esr"), a, mid, c.esr)?;
            mid
        } else {
            a
        };
        Ok(self.circuit.capacitor(name, top, b, c.capacitance, v0)?)
    }

    /// A diode with its junction capacitance.
    pub fn diode(
        &mut self,
        name: &str,
        anode: NodeId,
        cathode: NodeId,
        d: &Diode,
    ) -> Result<ElementId, ModelError> {
        let id = self
            .circuit
            .diode(name, anode, cathode, d.engine_params())?;
        if d.junction_capacitance > 0.0 {
            self.circuit.capacitor(
                &format!("{name}.cj"),
                anode,
                cathode,
                d.junction_capacitance,
                0.0,
            )?;
        }
        Ok(id)
    }

    /// A switch (drain `d`, source `s`) with Coss and body diode; off at t = 0.
    pub fn switch(
        &mut self,
        name: &str,
        d: NodeId,
        s: NodeId,
        sw: &Switch,
    ) -> Result<ElementId, ModelError> {
        let id = self.circuit.switch(
            name,
            d,
            s,
            SwitchParams {
                r_on: sw.r_on,
                r_off: sw.r_off,
            },
            false,
        )?;
        if sw.output_capacitance > 0.0 {
            self.circuit
                .capacitor(&format!("{name}.coss"), d, s, sw.output_capacitance, 0.0)?;
        }
        if let Some(body) = &sw.body_diode {
            self.diode(&format!("{name}.body"), s, d, body)?;
        }
        Ok(id)
    }

    /// A load resistor behind its own switch, so a load step can swap it for another
    /// (the switch's on-resistance is negligible against any load). Returns the switch.
    pub fn switched_load(
        &mut self,
        out: NodeId,
        name: &str,
        ohms: f64,
        on: bool,
    ) -> Result<ElementId, ModelError> {
        let mid = self.node(&format!("{name}.sw"));
        let sw = self
            .circuit
            .switch(&format!("{name}.sw"), out, mid, LOAD_SWITCH, on)?;
        self.circuit.resistor(name, mid, NodeId::GROUND, ohms)?;
        Ok(sw)
    }

    /// Source, source resistance, optional LC filter and bulk capacitor.
    pub fn input_stage(&mut self, input: &InputSource) -> Result<InputStage, ModelError> {
        let src = self.node("vs");
        let source = self.circuit.voltage_source(
            "vin",
            src,
            NodeId::GROUND,
            Waveform::Constant(input.voltage),
        )?;
        let mut node = src;
        if input.resistance > 0.0 {
            let next = self.node("vs.r");
            self.circuit
                .resistor("vin.r", node, next, input.resistance)?;
            node = next;
        }
        if let Some(f) = &input.filter {
            let next = self.node("filt");
            self.series_rl("filt", node, next, f.resistance, f.inductance)?;
            self.capacitor("filt.c", next, NodeId::GROUND, &f.capacitor, input.voltage)?;
            node = next;
        }
        if let Some(bulk) = &input.bulk {
            self.capacitor("bulk.c", node, NodeId::GROUND, bulk, input.voltage)?;
        }
        let v = Signal::of(Quantity::NodeVoltage(node));
        self.probe("in.v", v, "V");
        // The source's current flows a → b through it, out of its negative end; the
        // current delivered into the converter is its negative.
        self.probe(
            "in.i",
            Signal {
                terms: vec![(-1.0, Quantity::Current(source))],
            },
            "A",
        );
        Ok(InputStage { node, source })
    }

    /// Secondary leakage and resistance, rectifier, freewheel, output LC and load.
    pub fn output_stage(
        &mut self,
        d: &ForwardDesign,
        secondary_dot: NodeId,
    ) -> Result<OutputStage, ModelError> {
        let t = &d.transformer;
        let anode = self.node("sec");
        self.series_rl(
            "sec",
            secondary_dot,
            anode,
            t.secondary_resistance,
            t.secondary_leakage,
        )?;
        let rect_node = self.node("rect");
        let rectifier = self.diode("rect.d", anode, rect_node, &d.rectifier)?;
        let freewheel = self.diode("fw.d", NodeId::GROUND, rect_node, &d.freewheel)?;
        let out = self.node("out");
        let l = &d.output_inductor;
        let l_end = if l.dcr > 0.0 {
            self.node("lout.dcr")
        } else {
            out
        };
        let inductor = self
            .circuit
            .inductor("lout", rect_node, l_end, l.inductance, 0.0)?;
        if l.dcr > 0.0 {
            self.circuit.resistor("lout.dcr", l_end, out, l.dcr)?;
        }
        self.capacitor("cout", out, NodeId::GROUND, &d.output_capacitor, 0.0)?;
        let load_switch = match d.load.resistance {
            Some(r) => Some(self.switched_load(out, "load.r", r, true)?),
            None => None,
        };
        let sink = Waveform::Constant(d.load.current.unwrap_or(0.0));
        let load_sink = self
            .circuit
            .current_source("load.i", out, NodeId::GROUND, sink)?;
        self.probe("out.v", Signal::of(Quantity::NodeVoltage(out)), "V");
        self.probe("lout.i", Signal::of(Quantity::Current(inductor)), "A");
        self.probe("rect.i", Signal::of(Quantity::Current(rectifier)), "A");
        self.probe("fw.i", Signal::of(Quantity::Current(freewheel)), "A");
        self.probe("rect.v", Signal::of(Quantity::Voltage(rectifier)), "V");
        self.probe("fw.v", Signal::of(Quantity::Voltage(freewheel)), "V");
        Ok(OutputStage {
            rectifier,
            freewheel,
            inductor,
            load_sink,
            load_switch,
        })
    }
}

impl Default for Net {
    fn default() -> Self {
        Net::new()
    }
}
