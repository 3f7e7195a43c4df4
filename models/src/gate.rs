//! The open-loop gate source: fixed frequency and duty, with dead time around the
//! complementary switch. It lets every template run before the controller exists, and
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
        let t_period = self.period();
        let t0 = run.sim.time();
        let has_aux = run.key.aux_switch.is_some();
        for k in 0..periods {
            let start = t0 + k as f64 * t_period;
            run.set_aux(false)?;
            if has_aux {
                run.advance(start, sink)?;
            }
            run.set_main(self.duty > 0.0)?;
            run.start_cycle(t_period, self.duty, cycles);
            run.advance(start + self.duty * t_period, sink)?;
            run.set_main(false)?;
            if has_aux {
                run.advance(start + self.duty * t_period + self.dead_time, sink)?;
                run.set_aux(true)?;
                run.advance(start + t_period - self.dead_time, sink)?;
            } else {
                run.advance(start + t_period, sink)?;
            }
        }
        if has_aux {
            run.set_aux(false)?;
            run.advance(t0 + periods as f64 * t_period, sink)?;
        }
        Ok(())
    }
}
