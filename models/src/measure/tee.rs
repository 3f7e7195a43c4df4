//! The tee: one set of measurements fed from both the sample stream and the cycle
//! records, each forwarded unchanged to the run's own sink.
//!
//! A run takes its sample sink and its cycle sink as two separate `&mut` borrows, while
//! a measurement such as the start-up figures wants both streams. The [`Tee`] owns the
//! measurements behind a `RefCell` and hands out two thin adapters that share it; the
//! engine calls them one after the other, never re-entrantly, so the cell is never
//! borrowed twice.

use std::cell::RefCell;

use stepflux_engine::Sink;

use super::{Figure, Measurement};
use crate::cycles::{CycleRecord, CycleSink};

/// Measurements fed together.
pub struct Tee<'m> {
    measurements: RefCell<Vec<&'m mut dyn Measurement>>,
}

impl<'m> Tee<'m> {
    /// Feeds these measurements.
    pub fn new(measurements: Vec<&'m mut dyn Measurement>) -> Self {
        Tee {
            measurements: RefCell::new(measurements),
        }
    }

    /// A sample sink that feeds the measurements and then `inner`.
    pub fn samples<'t>(&'t self, inner: &'t mut dyn Sink) -> SampleTee<'t, 'm> {
        SampleTee { tee: self, inner }
    }

    /// A cycle sink that feeds the measurements and then `inner`.
    pub fn cycles<'t>(&'t self, inner: &'t mut dyn CycleSink) -> CycleTee<'t, 'm> {
        CycleTee { tee: self, inner }
    }

    /// Figures of every measurement, in the order given.
    pub fn figures(&self) -> Vec<Figure> {
        self.measurements
            .borrow()
            .iter()
            .flat_map(|m| m.figures())
            .collect()
    }
}

/// Sample side of a [`Tee`].
pub struct SampleTee<'t, 'm> {
    tee: &'t Tee<'m>,
    inner: &'t mut dyn Sink,
}

impl Sink for SampleTee<'_, '_> {
    fn sample(&mut self, time: f64, values: &[f64], at_event: bool) -> Result<(), String> {
        {
            let mut ms = self
                .tee
                .measurements
                .try_borrow_mut()
                .map_err(|_| "measurement tee re-entered".to_string())?;
            for m in ms.iter_mut() {
                m.sample(time, values, at_event);
            }
        }
        self.inner.sample(time, values, at_event)
    }
}

/// Cycle side of a [`Tee`].
pub struct CycleTee<'t, 'm> {
    tee: &'t Tee<'m>,
    inner: &'t mut dyn CycleSink,
}

impl CycleSink for CycleTee<'_, '_> {
    fn cycle(&mut self, record: &CycleRecord) {
        // The run hands records over between engine steps, never from inside a sample
        // call, so the cell is free here.
        if let Ok(mut ms) = self.tee.measurements.try_borrow_mut() {
            for m in ms.iter_mut() {
                m.cycle(record);
            }
        }
        self.inner.cycle(record);
    }
}
