//! A topology: which switches and diodes conduct. One bit per switchable element, in
//! the order of [`crate::layout::Layout::switchable`].

use crate::circuit::Circuit;
use crate::layout::Layout;

/// On/off state of every switch and diode, as a bit mask.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Default)]
pub struct Topology(pub u64);

impl Topology {
    /// Whether switchable element `bit` conducts.
    pub fn is_on(self, bit: usize) -> bool {
        self.0 >> bit & 1 == 1
    }

    /// The same topology with `bit` set to `on`.
    pub fn with(self, bit: usize, on: bool) -> Self {
        if on {
            Topology(self.0 | 1 << bit)
        } else {
            Topology(self.0 & !(1 << bit))
        }
    }

    /// Human-readable list of the conducting elements, for errors.
    pub fn describe(self, circuit: &Circuit, layout: &Layout) -> String {
        let on: Vec<&str> = layout
            .switchable
            .iter()
            .enumerate()
            .filter(|&(bit, _)| self.is_on(bit))
            .map(|(_, e)| circuit.elements[e.0].name.as_str())
            .collect();
        if on.is_empty() {
            "all switches and diodes off".to_string()
        } else {
            format!("on: {}", on.join(", "))
        }
    }
}
