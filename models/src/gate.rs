//! The open-loop gate source: fixed frequency and duty, with dead time around the
//! complementary switch. It drives every open-loop run (no controller in the scenario), and
//! is what the open-loop checks use.

use stepflux_engine::Sink;

use crate::cycles::CycleSink;
use crate::error::ModelError;
use crate::run::ConverterRun;

/// Fixed-frequency, fixed-duty gate drive.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct OpenLoopGate {
    /// Switching frequency, hertz.
    pub frequency: f64,
    /// Main-switch on-time over period, 0 ≤ duty < 1.
    pub duty: f64,
    /// Dead time between the main and the complementary switch, seconds.
    pub dead_time: f64,
}

impl OpenLoopGate {
    /// Period, seconds.
    pub fn period(&self) -> f64 {
        1.0 / self.frequency
    }

    /// Checks the values: the complementary switch needs room for two dead times.
    pub fn validate(&self) -> Result<(), ModelError> {
        crate::components::positive("gate.frequency", self.frequency)?;
        crate::components::non_negative("gate.dead_time", self.dead_time)?;
        let t = self.period();
        let off = (1.0 - self.duty) * t;
        if !(0.0..1.0).contains(&self.duty) {
            return Err(ModelError::OutOfRange {
                field: "gate.duty".into(),
                value: self.duty,
                allowed: "0 ≤ duty < 1".into(),
            });
        }
        if 2.0 * self.dead_time >= off {
            return Err(ModelError::OutOfRange {
                field: "gate.dead_time".into(),
                value: self.dead_time,
                allowed: format!("less than half the off time, {:e} s", off / 2.0),
            });
        }
        Ok(())
    }

    /// Runs `periods` switching periods from the run's present time, which is taken as
    /// a period boundary, and closes the last cycle record. Each turn-on opens one.
    pub fn run(
        &self,
        run: &mut ConverterRun,
        periods: usize,
        sink: &mut dyn Sink,
        cycles: &mut dyn CycleSink,
    ) -> Result<(), ModelError> {
        self.run_periods(run, periods, sink, cycles)?;
        run.finish(cycles);
        Ok(())
    }

    /// As [`OpenLoopGate::run`] but leaves the last cycle open, so a long run can be
    /// driven in slices; end with [`ConverterRun::finish`].
    pub fn run_periods(
        &self,
        run: &mut ConverterRun,
        periods: usize,
        sink: &mut dyn Sink,
        cycles: &mut dyn CycleSink,
    ) -> Result<(), ModelError> {
        self.validate()?;
        let t0 = run.sim.time();
        for k in 0..periods {
            let start = t0 + k as f64 * self.period();
            self.one_period(run, start, f64::INFINITY, sink, cycles)?;
        }
        Ok(())
    }

    /// Runs from the present period boundary to `end`, which falls inside that period:
    /// the gates follow the same pattern until the run stops, so a run ends at its stop
    /// time exactly. The cycle record opened is left open for [`ConverterRun::finish`].
    pub fn run_until(
        &self,
        run: &mut ConverterRun,
        end: f64,
        sink: &mut dyn Sink,
        cycles: &mut dyn CycleSink,
    ) -> Result<(), ModelError> {
        self.validate()?;
        let start = run.sim.time();
        // Anything shorter than the event resolution (1e-9 of a period) is the end.
        if end - start <= 1e-9 * self.period() {
            return Ok(());
        }
        self.one_period(run, start, end, sink, cycles)
    }

    /// One period from `start`, stopping early at `end` (∞ for a whole period).
    fn one_period(
        &self,
        run: &mut ConverterRun,
        start: f64,
        end: f64,
        sink: &mut dyn Sink,
        cycles: &mut dyn CycleSink,
    ) -> Result<(), ModelError> {
        // Advances to `t` unless the run ends first; false once it has ended.
        let go =
            |run: &mut ConverterRun, t: f64, sink: &mut dyn Sink| -> Result<bool, ModelError> {
                run.advance(t.min(end), sink)?;
                Ok(t < end)
            };
        let t_period = self.period();
        let has_aux = run.key.aux_switch.is_some();
        run.set_main(self.duty > 0.0)?;
        run.start_cycle(t_period, self.duty, cycles);
        if !go(run, start + self.duty * t_period, sink)? {
            return Ok(());
        }
        run.set_main(false)?;
        if has_aux {
            if !go(run, start + self.duty * t_period + self.dead_time, sink)? {
                return Ok(());
            }
            run.set_aux(true)?;
            if !go(run, start + t_period - self.dead_time, sink)? {
                return Ok(());
            }
            // The dead time before the next turn-on: the period ends with both off.
            run.set_aux(false)?;
        }
        go(run, start + t_period, sink)?;
        Ok(())
    }
}
