//! Range checks that need more than one value's unit: turn counts, and a run long
//! enough to hold one switching period. Kept apart from the field-by-field
//! validation so each rule has one home.

use super::error::ScenarioError;
use super::validate::Ctx;
use crate::job::Job;

/// Turns per winding: at least one (a fraction of a turn does not link the core in
/// the model's sense) and at most ten thousand, beyond any power transformer
/// (common practice).
const TURNS: (f64, f64) = (1.0, 1e4);

/// Turn counts, run length against the switching period.
pub fn check(ctx: &Ctx, job: &Job) -> Result<(), ScenarioError> {
    let t = &job.design.transformer;
    let mut windings = vec![
        ("converter.transformer.primary_turns", t.primary_turns),
        ("converter.transformer.secondary_turns", t.secondary_turns),
    ];
    if t.reset_turns != 0.0 {
        windings.push(("converter.reset.reset_winding.turns", t.reset_turns));
    }
    for (field, n) in windings {
        ctx.within(field, n, TURNS.0, TURNS.1)?;
    }
    let period = 1.0 / job.design_point().frequency;
    let stop = job.analysis.stop_time;
    if stop < period {
        return Err(ctx.range(
            "analysis.stop_time",
            format!("{stop} s"),
            &format!(
                "at least one switching period, {period:e} s (the measurements and the \
                 cycle table need whole periods)"
            ),
        ));
    }
    Ok(())
}
