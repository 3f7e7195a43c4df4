//! The exact stepper: state, stepping on the tick grid, event location by bisection on
//! the cached propagator ladder (`step.rs`), diode settling, storm guard, output
//! sampling.
//!
//! The stepping loop allocates nothing of its own: every vector it touches is allocated
//! when the simulation is built. What a circuit needs the first time it is needed (a
//! topology, a table entry of its ladder, a meter block for an entry) is allocated
//! then, once, and kept.

use nalgebra::DVector;

use crate::circuit::{Circuit, ElementId};
use crate::error::EngineError;
use crate::event::{free_slot, EventFn, EventSlot, Sink, StepOutcome, Stop, MAX_ARMED};
use crate::ladder::{Tick, TimeGrid};
use crate::run::RunState;
use crate::system::{Observation, System};
use crate::topology::Topology;
use meters::MeterSums;
pub use sensitivity::EventStamp;
use sensitivity::Sensitivity;
use sources::SourceParts;
use spans::Spans;

/// Limits on how many events may happen how quickly before a run is declared stuck.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StormGuard {
    /// Events allowed within `window`.
    pub max_events: usize,
    /// Seconds.
    pub window: f64,
}

/// Run options. [`SimOptions::for_period`] gives settings suited to a switching period.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SimOptions {
    /// Longest step, seconds (top rung of the ladder).
    pub max_step: f64,
    /// Events are located to within this many seconds (tick length upper bound).
    pub event_resolution: f64,
    /// Output sample interval, seconds; `None` for event samples only.
    pub sample_interval: Option<f64>,
    /// Storm guard.
    pub storm: StormGuard,
    /// Most topologies kept in the cache.
    pub cache_limit: usize,
}

impl SimOptions {
    /// Options for a circuit switching with period `period` seconds: events located to
    /// max(1 ps, 1e-9·period); at most 1/4 period per step (shorter where a lightly
    /// damped oscillation asks for it); more than 500 events in
    /// 1 % of a period is a storm. A quarter period rather than a sixteenth: on the
    /// closed-loop demo it cuts the steps per period by a quarter (measured: 104k → 77k
    /// instructions per period), and a longer cap gained nothing more.
    pub fn for_period(period: f64) -> Self {
        SimOptions {
            max_step: period / 4.0,
            event_resolution: (1e-9 * period).max(1e-12),
            sample_interval: None,
            storm: StormGuard {
                max_events: 500,
                window: period / 100.0,
            },
            cache_limit: 256,
        }
    }
}

/// One armed event.
#[derive(Clone, Copy)]
struct Armed {
    f: EventFn,
    row: usize,
}

/// A running simulation: the problem, its present state and preallocated work space.
pub struct Simulation {
    /// The problem, state, topology and breakpoint schedule, shared with the
    /// reference path.
    run: RunState,
    tick: Tick,
    armed: [Option<Armed>; MAX_ARMED],
    /// Bumped whenever the state, topology or armed events change outside a plain
    /// step, so event values cached for a tick are known to be stale.
    generation: u64,
    /// (tick, generation) at which `g_lo` holds the event values of `z`.
    g_lo_at: Option<(Tick, u64)>,
    /// Topology last reported to the sink.
    reported: Topology,
    /// One past the highest occupied slot: loops over events stop here.
    armed_len: usize,
    sample_every: Option<Tick>,
    next_sample: Tick,
    next_break: Tick,
    pending_flagged: bool,
    meters: MeterSums,
    storm: StormRing,
    // Work space.
    g_lo: Vec<f64>,
    g_mid: Vec<f64>,
    g_hi: Vec<f64>,
    /// A step's output in the table's row order (see [`crate::ladder::Ladder`]).
    ext: Vec<f64>,
    /// Event rows at the present state.
    raw: Vec<f64>,
    spans: Spans,
    sources: SourceParts,
    values: Vec<f64>,
    /// Event functions' slopes at the present state and at a step's end.
    d_lo: Vec<f64>,
    d_hi: Vec<f64>,
    /// Slopes of the event rows at a state (as `raw` holds their values).
    raw_d: Vec<f64>,
    /// Tick and state where the step being taken began: output samples and extrema
    /// inside it are read off from here once it is done.
    start_tick: Tick,
    start_z: DVector<f64>,
    /// Work space for reading inside a step: a state, the one it is read from, a
    /// step's output and a sources' part.
    peek_z: Vec<f64>,
    peek_from: Vec<f64>,
    peek_ext: Vec<f64>,
    peek_b: Vec<f64>,
    trace: trace::TraceState,
    /// Longest next step, ticks: short after a switching instant, growing after.
    ramp: Tick,
    /// ∂x/∂x₀ carried along when asked for ([`Simulation::track_sensitivity`]).
    sens: Option<Sensitivity>,
    /// The latest armed crossing, while sensitivities are tracked.
    last_stamp: Option<EventStamp>,
}

impl Simulation {
    /// Checks the circuit, builds the grid, sets initial values and settles the diodes
    /// at t = 0.
    pub fn new(
        circuit: Circuit,
        observation: Observation,
        options: SimOptions,
    ) -> Result<Self, EngineError> {
        let grid = TimeGrid::new(options.max_step, options.event_resolution)?;
        if !(options.storm.window.is_finite()
            && options.storm.window > 0.0
            && options.storm.max_events > 0)
        {
            return Err(EngineError::BadOption {
                what: "storm.window",
                value: options.storm.window,
                allowed: "a positive window and event count",
            });
        }
        let sample_every = match options.sample_interval {
            None => None,
            Some(dt) if dt.is_finite() && dt > 0.0 => Some(grid.tick(dt).max(1)),
            Some(dt) => {
                return Err(EngineError::BadOption {
                    what: "sample_interval",
                    value: dt,
                    allowed: "a positive time in seconds",
                })
            }
        };
        let system = System::new(circuit, observation, grid, options.cache_limit)?;
        let run = RunState::new(system, 4 * MAX_ARMED)?;
        let (system, topo) = (&run.system, &run.topo);
        let nz = run.z.len();
        let n_rows = topo.row_count();
        let n_events = system.diode_count() + MAX_ARMED;
        let (ext_rows, topo_events) = (topo.ladder_rows(), topo.event_rows());
        let n_meters = system.observation.meters.len();
        let n_probes = system.observation.probes.len();
        let storm_ticks = grid.tick(options.storm.window).max(1);
        let mut sim = Simulation {
            run,
            tick: 0,
            armed: [None; MAX_ARMED],
            armed_len: 0,
            reported: Topology::default(),
            generation: 0,
            g_lo_at: None,
            sample_every,
            next_sample: 0,
            next_break: Tick::MAX,
            pending_flagged: true,
            meters: MeterSums::new(n_meters, nz, options.cache_limit),
            storm: StormRing::new(options.storm.max_events, storm_ticks),
            g_lo: vec![0.0; n_events],
            g_mid: vec![0.0; n_events],
            g_hi: vec![0.0; n_events],
            ext: vec![0.0; ext_rows],
            raw: vec![0.0; topo_events],
            spans: Spans::new(ext_rows, nz),
            sources: SourceParts::new(ext_rows),
            values: vec![0.0; n_rows],
            d_lo: vec![0.0; n_events],
            d_hi: vec![0.0; n_events],
            raw_d: vec![0.0; topo_events],
            start_tick: 0,
            start_z: DVector::zeros(nz),
            peek_z: vec![0.0; nz],
            peek_from: vec![0.0; nz],
            peek_ext: vec![0.0; ext_rows],
            peek_b: vec![0.0; ext_rows],
            trace: trace::TraceState::new(n_probes),
            ramp: step::RAMP_START,
            sens: None,
            last_stamp: None,
        };
        sim.refresh_next_break();
        sim.sources_changed();
        sim.settle()?;
        Ok(sim)
    }

    /// Present time, seconds.
    #[inline]
    pub fn time(&self) -> f64 {
        self.run.system.grid.time(self.tick)
    }

    /// The time grid.
    pub fn grid(&self) -> &TimeGrid {
        &self.run.system.grid
    }

    /// The problem being simulated.
    #[inline]
    pub fn system(&self) -> &System {
        &self.run.system
    }

    /// Augmented state z = [x; 1; w; s] (see [`crate::layout`]).
    #[inline]
    pub fn state(&self) -> &DVector<f64> {
        &self.run.z
    }

    /// Replaces the dynamic states x (length nx) and settles the diodes.
    pub fn set_states(&mut self, x: &[f64]) -> Result<(), EngineError> {
        self.run.set_states(x)?;
        self.restart_sensitivity();
        self.pending_flagged = true;
        self.settle()
    }

    /// Present topology.
    #[inline]
    pub fn topology(&self) -> Topology {
        self.run.topo.topology
    }

    /// Integrals of the meters so far, in the order of the observation (formed from
    /// sums kept per topology, so a read costs more than a step: read them when a
    /// figure is wanted, not at every step).
    pub fn meters(&self) -> Vec<f64> {
        self.meters.totals()
    }

    /// Sums the steps from now on into the meters (`true`, the default) or leaves them
    /// out: a run that reads its meters only over a late window need not pay for the
    /// steps before it. Where steps fall does not depend on it (the stepping chooses
    /// its steps as if meters were on), so no switching instant or state moves.
    pub fn set_metering(&mut self, on: bool) {
        self.meters.set_on(on);
    }

    /// Present value of event signal `k` (without offset or rate).
    #[inline]
    pub fn event_signal(&self, k: usize) -> f64 {
        self.run.event_signal(k)
    }

    /// Present value of probe `k`.
    #[inline]
    pub fn probe(&self, k: usize) -> f64 {
        self.run.probe(k)
    }

    /// Turns a switch on or off now, then settles the diodes.
    pub fn set_gate(&mut self, switch: ElementId, on: bool) -> Result<(), EngineError> {
        if self.run.set_gate(switch, on)? {
            self.pending_flagged = true;
            self.settle()?;
        }
        Ok(())
    }

    /// Sets an independent source to `value` with `slope` per second from now on
    /// (until its own waveform's next breakpoint), then settles the diodes.
    pub fn set_source(
        &mut self,
        source: ElementId,
        value: f64,
        slope: f64,
    ) -> Result<(), EngineError> {
        self.run.set_source(source, value, slope)?;
        self.sources_changed();
        self.pending_flagged = true;
        self.settle()
    }

    /// Arms an event; returns its slot.
    pub fn arm(&mut self, f: EventFn) -> Result<EventSlot, EngineError> {
        let slot = free_slot(
            &f,
            self.run.system.observation.event_signals.len(),
            &self.armed,
        )?;
        let nd = self.run.system.diode_count();
        let armed = Armed {
            f,
            row: nd + f.signal,
        };
        self.armed[slot] = Some(armed);
        self.armed_len = self.armed_len.max(slot + 1);
        if self.g_lo_at == Some((self.tick, self.generation)) {
            // The cached event values stay good: only the new slot's is missing.
            let raw = self.run.topo.value(armed.row, &self.run.z);
            self.g_lo[nd + slot] = step::armed_value(&armed, raw, self.time());
            let slope = self.run.topo.slope(armed.row, self.run.z.as_slice()) + f.rate;
            self.d_lo[nd + slot] = match f.direction {
                crate::event::Direction::Rising => slope,
                crate::event::Direction::Falling => -slope,
            };
        } else {
            self.generation += 1;
        }
        Ok(EventSlot(slot as u8))
    }

    /// Disarms an event.
    pub fn disarm(&mut self, slot: EventSlot) {
        if let Some(a) = self.armed.get_mut(usize::from(slot.0)) {
            *a = None;
        }
        self.armed_len = self
            .armed
            .iter()
            .rposition(Option::is_some)
            .map_or(0, |i| i + 1);
    }

    /// Runs until `until` seconds or until an armed event crosses.
    pub fn advance(&mut self, until: f64, sink: &mut dyn Sink) -> Result<Stop, EngineError> {
        let stop = self.run.system.grid.tick(until);
        loop {
            match self.step(stop, sink)? {
                StepOutcome::StopTime => return Ok(Stop::Reached),
                StepOutcome::Event { time, armed, .. } if armed != 0 => {
                    return Ok(Stop::Armed { time, mask: armed })
                }
                _ => {}
            }
        }
    }

    /// One internal step towards tick `stop`: a grid step, an event, or the stop time.
    pub fn step_to(&mut self, stop: f64, sink: &mut dyn Sink) -> Result<StepOutcome, EngineError> {
        let stop = self.run.system.grid.tick(stop);
        self.step(stop, sink)
    }

    /// Work due at the grid point just reached: source breakpoints, then samples.
    fn on_grid_point(&mut self, sink: &mut dyn Sink) -> Result<(), EngineError> {
        if self.tick == self.next_break {
            self.apply_breakpoints()?;
        }
        if let Some(every) = self.sample_every {
            if self.tick == self.next_sample {
                self.emit(sink, false)?;
                self.next_sample += every;
            }
        }
        Ok(())
    }
}

/// Ring of recent event ticks for the storm guard.
struct StormRing {
    ticks: Vec<Tick>,
    next: usize,
    filled: bool,
    window: Tick,
}

impl StormRing {
    fn new(capacity: usize, window: Tick) -> Self {
        StormRing {
            ticks: vec![0; capacity],
            next: 0,
            filled: false,
            window,
        }
    }

    /// Records an event; Err(count) when `capacity` events fall inside the window.
    fn record(&mut self, tick: Tick) -> Result<(), usize> {
        let oldest = self.ticks[self.next];
        self.ticks[self.next] = tick;
        self.next = (self.next + 1) % self.ticks.len();
        self.filled |= self.next == 0;
        if self.filled && tick - oldest < self.window {
            return Err(self.ticks.len());
        }
        Ok(())
    }
}

mod meters;
mod probe_rows;
mod sensitivity;
mod sources;
mod spans;
mod step;
mod stepper;
mod support;
mod trace;
