//! Wall time of a 40-point loop gain of the demo (`demo_design()` under
//! `demo_controller()`, fs/1000 to fs/2 on a log grid) by (a) the sampled-data model
//! and by (b) injection into the switching simulation, on one core, with the margins
//! each gives and the averaged model's beside them.
//!
//! (a) is split into its parts: the steady state (shooting on a fresh closed-loop map),
//! the linearisation (2·nx + 8 metered periods: states, control input, and the load
//! and line columns on their own loops), the 40 frequencies, and the margins search
//! (200 points a decade and bisection). (b) injects the 40 frequencies moved to the
//! commensurate grid one after another on one map (the command runs them in parallel;
//! here one core, as the target is stated), from the same steady state.
//!
//! Run: `cargo bench -p stepflux-models --bench loop_gain`. A plain bench (no
//! criterion): (a) the best of five runs, (b) one run (seconds long, its spread is the
//! machine's).

use std::time::{Duration, Instant};

use nalgebra::Complex;
use stepflux_models::averaged::AveragedModel;
use stepflux_models::demo_design::{demo_controller, demo_design};
use stepflux_models::loopgain::{
    commensurate, inject, linearise, log_grid, loop_map, margins, margins_on_grid,
    InjectionOptions, LinearOptions, Margins,
};
use stepflux_models::steady::{shoot, ShootingOptions};

const POINTS: usize = 40;
const REPEATS: usize = 5;

fn show(label: &str, m: &Margins) {
    let v = |x: Option<f64>, f: &dyn Fn(f64) -> String| x.map_or("-".into(), f);
    println!(
        "  {label:<9} crossover {:>10}  phase margin {:>6}  gain margin {:>8} at {}",
        v(m.crossover, &|x| format!("{:.2} kHz", x / 1e3)),
        v(m.phase_margin, &|x| format!("{x:.1}°")),
        v(m.gain_margin, &|x| format!("{x:.1} dB")),
        v(m.phase_crossover, &|x| format!("{:.1} kHz", x / 1e3)),
    );
}

fn ms(d: Duration) -> f64 {
    d.as_secs_f64() * 1e3
}

fn main() {
    let (design, spec) = (demo_design(), demo_controller());
    let fs = spec.oscillator.frequency;
    let grid = log_grid(fs / 1000.0, fs / 2.0, POINTS);
    let mut best = [Duration::MAX; 5];
    let mut last = None;
    for _ in 0..REPEATS {
        let t0 = Instant::now();
        let mut map = loop_map(&design, &spec).expect("demo builds");
        let steady = shoot(&mut map, &ShootingOptions::default()).expect("steady state");
        let t1 = Instant::now();
        let m = linearise(&design, &spec, &steady, &LinearOptions::default()).expect("linear");
        let t2 = Instant::now();
        let bode = m.bode(&grid).expect("bode");
        let t3 = Instant::now();
        let mg = margins(fs / 1000.0, fs / 2.0, |f| Ok(m.at(f)?.loop_gain)).expect("margins");
        let t4 = Instant::now();
        for (b, d) in best
            .iter_mut()
            .zip([t1 - t0, t2 - t1, t3 - t2, t4 - t3, t4 - t0])
        {
            *b = (*b).min(d);
        }
        assert_eq!(bode.len(), POINTS);
        last = Some((steady, mg));
    }
    let (steady, mg_a) = last.expect("ran");
    println!(
        "(a) sampled-data, {POINTS} points: {:.1} ms (steady state {:.1}, linearisation {:.1}, \
         {POINTS} frequencies {:.2}, margins {:.1}), best of {REPEATS}",
        ms(best[4]),
        ms(best[0]),
        ms(best[1]),
        ms(best[2]),
        ms(best[3])
    );
    let opts = InjectionOptions::default();
    let mut injected: Vec<(f64, Complex<f64>)> = grid
        .iter()
        .map(|&f| {
            let (m, n) = commensurate(f, fs, opts.short_window);
            (m as f64 * fs / n as f64, Complex::new(0.0, 0.0))
        })
        .collect();
    injected.dedup_by(|a, b| (a.0 / b.0 - 1.0).abs() < 1e-12);
    let t = Instant::now();
    let mut map = loop_map(&design, &spec).expect("demo builds");
    let mut periods = 0;
    for p in injected.iter_mut() {
        let r = inject(&mut map, &spec, &steady, p.0, &opts).expect("injection");
        *p = (r.frequency, r.loop_gain);
        periods += r.periods;
    }
    let tb = t.elapsed();
    println!(
        "(b) injection, {} points, one core: {:.2} s, {periods} switching periods \
         ({:.1} µs/period); ratio (b)/(a) {:.0}×",
        injected.len(),
        tb.as_secs_f64(),
        tb.as_secs_f64() / periods as f64 * 1e6,
        tb.as_secs_f64() / best[4].as_secs_f64()
    );
    let avg = AveragedModel::new(&design, &spec).expect("averaged");
    let mg_avg = margins(fs / 1000.0, fs / 2.0, |f| avg.loop_gain(f)).expect("margins");
    println!("margins of the demo:");
    show("sampled", &mg_a);
    show("injected", &margins_on_grid(&injected));
    show("averaged", &mg_avg);
}
