//! Names of the engine's dynamic states: each entry of x belongs to one element (an
//! inductor's current, a capacitor's voltage) or one behavioural block, so a state can
//! be written and read by that element's name instead of by its position.

use stepflux_engine::{Circuit, Layout, StateKind, System};

/// What kind of quantity a state is; it decides the unit and the absolute tolerance
/// floor of the steady-state test.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum StateClass {
    /// Inductor current, amperes.
    Current,
    /// Capacitor voltage, volts.
    Voltage,
    /// Internal state of a behavioural block (the controller's macromodels keep volts
    /// there, but the engine does not know).
    Block,
}

impl StateClass {
    /// SI unit symbol ("" for a block state).
    pub fn unit(self) -> &'static str {
        match self {
            StateClass::Current => "A",
            StateClass::Voltage => "V",
            StateClass::Block => "",
        }
    }

    /// Words for reports.
    pub fn describe(self) -> &'static str {
        match self {
            StateClass::Current => "inductor current",
            StateClass::Voltage => "capacitor voltage",
            StateClass::Block => "block state",
        }
    }
}

/// The name of one entry of x.
#[derive(Clone, Debug, PartialEq)]
pub struct StateName {
    /// The owner's name: the element's (`lout`, `cout`, `ctl.ea.c1`), or for a block
    /// `block[k]` with k the state's index in the block.
    pub name: String,
    /// Its kind and unit.
    pub class: StateClass,
}

/// Names of every entry of x, in the engine's order.
pub fn state_names(system: &System) -> Vec<StateName> {
    names_in(system.circuit(), system.layout())
}

/// As [`state_names`], for a circuit not yet simulated.
pub fn circuit_state_names(circuit: &Circuit) -> Result<Vec<StateName>, crate::ModelError> {
    Ok(names_in(circuit, &Layout::new(circuit)?))
}

fn names_in(circuit: &Circuit, layout: &Layout) -> Vec<StateName> {
    layout
        .states
        .iter()
        .enumerate()
        .map(|(i, s)| match *s {
            StateKind::InductorCurrent(e) => StateName {
                name: circuit.element(e).name.clone(),
                class: StateClass::Current,
            },
            StateKind::CapacitorVoltage(e) => StateName {
                name: circuit.element(e).name.clone(),
                class: StateClass::Voltage,
            },
            StateKind::Block(_, k) => StateName {
                name: block_state_name(circuit, layout, i, k),
                class: StateClass::Block,
            },
        })
        .collect()
}

/// `block[k]`: the engine keeps a block's index private, but the layout lists each
/// block's first state, so the block owning state `i` (its `k`-th) is the one whose
/// states start at `i − k` and that has more than `k` of them.
fn block_state_name(circuit: &Circuit, layout: &Layout, i: usize, k: usize) -> String {
    let blocks = circuit.blocks();
    let owner = layout
        .block_offset
        .iter()
        .zip(blocks)
        .find(|(&first, b)| first + k == i && b.a.len() > k)
        .map_or("block", |(_, b)| b.name.as_str());
    format!("{owner}[{k}]")
}

/// Why named values could not be placed.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum NameError {
    /// A name that is not a state of this circuit.
    #[error("'{name}' is not a state of this converter; valid names: {valid}")]
    Unknown {
        /// The name given.
        name: String,
        /// Every valid name with its kind and unit.
        valid: String,
    },
    /// The same state named twice.
    #[error("state '{0}' is given twice")]
    Repeated(String),
}

/// "lout (inductor current, A), cout (capacitor voltage, V), …" for error messages.
pub fn describe_all(names: &[StateName]) -> String {
    names
        .iter()
        .map(|n| match n.class.unit() {
            "" => format!("{} ({})", n.name, n.class.describe()),
            u => format!("{} ({}, {u})", n.name, n.class.describe()),
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// Writes `values` (name, value) over `x`, leaving states not named as they are.
pub fn place(
    names: &[StateName],
    values: &[(String, f64)],
    x: &mut [f64],
) -> Result<(), NameError> {
    let mut seen = vec![false; names.len()];
    for (name, value) in values {
        let k = names
            .iter()
            .position(|n| &n.name == name)
            .ok_or_else(|| NameError::Unknown {
                name: name.clone(),
                valid: describe_all(names),
            })?;
        if std::mem::replace(&mut seen[k], true) {
            return Err(NameError::Repeated(name.clone()));
        }
        x[k] = *value;
    }
    Ok(())
}

/// Overlays the named values on `x` where a state of that name exists, leaving the
/// others as they are: a run may carry states a steady search did not (load-step
/// branches), which keep their values.
pub fn overlay<'v>(
    names: &[StateName],
    values: impl IntoIterator<Item = (&'v str, f64)>,
    x: &mut [f64],
) {
    for (name, value) in values {
        if let Some(k) = names.iter().position(|n| n.name == name) {
            x[k] = value;
        }
    }
}
