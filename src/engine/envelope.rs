//! Envelope following: steps of many mains cycles over a slowly drifting state.
//!
//! Let `x` be the circuit's continuous state at a cycle boundary (every capacitor's voltage
//! and every winding's flux) and `F` one cycle of ordinary stepping, `x(k+1) = F(x(k))`,
//! with the discrete modes held. Its Jacobian `J = dF/dx` (the monodromy matrix) is found
//! by finite differences: one cycle from the boundary state and one from each state
//! variable nudged. While the cycle map is close to affine (an RC delay charging while the
//! rest repeats), the increments of successive cycles follow `d(k+1) = J d(k)`, so `M`
//! cycles ahead the state is `x(k) + (J + J^2 + ... + J^M) d(k)` — exact for an affine map,
//! and stable for any `M`: modes that die out within a few cycles have `J^j` near 0 and add
//! nothing (the envelope step is the exponential, L-stable form of Petzold's and Kundert,
//! White and Sangiovanni-Vincentelli's envelope step; see `docs/engine.md`).
//!
//! Each step is checked: one ordinary cycle from the jumped state measures the increment
//! there, and the difference from the predicted `J^(M+1) d(k)`, times `M/2` (the error an
//! inexact `J` piles up over the step), must stay within the tolerance, or the step is
//! retried shorter. Each observed pair of consecutive increments corrects `J` along the
//! drift (Broyden's rank-one update), so the slow mode that sets the step is exact. A step
//! never crosses a source breakpoint or the caller's horizon, never starts while anything
//! is pending or a discrete change happened in the last cycle, stops short of where a
//! device's crossing function (its largest value per cycle, extrapolated along the
//! envelope) would reach zero, and is refused when a device's operating region at the
//! boundary differs after it or a discrete change happens in the checking cycle: the
//! cycles around every discrete event are stepped in full, so events are located as
//! precisely as without envelope following.

use super::*;
use nalgebra::{DMatrix, DVector};

/// What one cycle of ordinary stepping showed.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct CycleSummary {
    /// Discrete changes during the cycle.
    pub events: usize,
    /// For each device with a discrete state, the largest value its crossing function
    /// took at the cycle's accepted steps (it changes state when this becomes positive).
    pub crossing_max: Vec<f64>,
}

/// An observer that passes everything on and notes what [`CycleSummary`] holds.
struct CycleWatch<'a, O: ?Sized> {
    inner: &'a mut O,
    summary: CycleSummary,
}

impl<O: Observer + ?Sized> Observer for CycleWatch<'_, O> {
    fn step(&mut self, network: &Network, state: &SimState) {
        for (slot, &d) in network.discrete_devices.iter().enumerate() {
            if let Some(c) = network.devices[d].crossing(&state.x, state.modes[d]) {
                let max = &mut self.summary.crossing_max[slot];
                *max = max.max(c);
            }
        }
        self.inner.step(network, state);
    }

    fn event(&mut self, network: &Network, event: &DiscreteEvent) {
        self.summary.events += 1;
        self.inner.event(network, event);
    }
}

impl Simulator {
    /// [`Simulator::advance`] over one stretch (normally one mains cycle), noting its
    /// discrete changes and the largest value of each crossing function.
    pub fn advance_cycle<O: Observer + ?Sized>(
        &mut self,
        state: &mut SimState,
        t_end: f64,
        observer: &mut O,
    ) -> Result<CycleSummary, SimError> {
        let crossing_max = self
            .network
            .discrete_devices
            .iter()
            .map(|&d| {
                self.network.devices[d]
                    .crossing(&state.x, state.modes[d])
                    .unwrap_or(f64::NEG_INFINITY)
            })
            .collect();
        let mut watch = CycleWatch {
            inner: observer,
            summary: CycleSummary {
                events: 0,
                crossing_max,
            },
        };
        self.advance(state, t_end, &mut watch)?;
        Ok(watch.summary)
    }

    /// The continuous state variables: each capacitor's voltage and each winding's flux
    /// (history slot, absolute tolerance).
    fn state_slots(&self, settings: &EnvelopeSettings) -> Vec<(usize, f64)> {
        let mut slots = Vec::new();
        for device in &self.network.devices {
            match device {
                Device::Capacitor { hist, .. } => slots.push((*hist, settings.voltage_abstol)),
                Device::Windings(w) => {
                    for k in 0..w.count {
                        let l = w.inductance[k][k];
                        slots.push((w.hist + 3 * k, -l * settings.current_abstol));
                    }
                }
                _ => {}
            }
        }
        slots
    }

    /// For each state variable of [`Simulator::state_slots`], whether it is the flux of one
    /// of several coupled windings (whose fluxes only make sense together).
    fn coupled_slots(&self) -> Vec<bool> {
        let mut coupled = Vec::new();
        for device in &self.network.devices {
            match device {
                Device::Capacitor { .. } => coupled.push(false),
                Device::Windings(w) => coupled.extend((0..w.count).map(|_| w.count > 1)),
                _ => {}
            }
        }
        coupled
    }

    /// A copy of `base` moved `dt` later with its continuous state set to `y`, the other
    /// unknowns solved to agree with it (a very short backward-Euler step, as a start from
    /// rest) and integration restarted.
    fn jumped(
        &mut self,
        base: &SimState,
        slots: &[(usize, f64)],
        y: &[f64],
        dt: f64,
    ) -> Result<SimState, SimError> {
        let mut state = base.clone();
        for (&(slot, _), &value) in slots.iter().zip(y) {
            state.hist[slot] = value;
        }
        state.time += dt;
        state.past_t = [state.time; 2];
        let ctx = self.context(state.time, 1e-9, Method::BackwardEuler);
        self.newton(&mut state, &ctx, self.settings.max_newton_iterations, false)
            .map_err(|f| self.failure(f, &ctx))?;
        state.x.copy_from_slice(&self.ws.x_sol);
        state.past_x[..state.x.len()].copy_from_slice(&state.x);
        self.restart(&mut state);
        Ok(state)
    }

    /// The operating region of every device that has them.
    fn regimes(&self, x: &[f64]) -> Vec<i8> {
        let on = self.settings.corner_current_a;
        self.network
            .regime_devices
            .iter()
            .map(|&d| self.network.devices[d].regime(x, on))
            .collect()
    }
}

/// Records the instants of accepted steps.
struct Instants(Vec<f64>);

impl Observer for Instants {
    fn step(&mut self, _network: &Network, state: &SimState) {
        self.0.push(state.time);
    }
}

impl Simulator {
    /// Steps `state` through the instants `times` exactly: no error control, corners or
    /// discrete changes (the modes are held).
    fn step_through(&mut self, state: &mut SimState, times: &[f64]) -> Result<(), SimError> {
        for &t in times {
            let h = t - state.time;
            if h <= 0.0 {
                continue;
            }
            let method = if state.points_since_break <= 1 {
                Method::BackwardEuler
            } else {
                Method::Trapezoidal
            };
            let ctx = self.context(t, h, method);
            // One more Newton iteration from the converged solution: the finite differences
            // need the solution far below the update tolerance.
            if let Err(f) = self
                .solve_step(state, h, method, false)
                .and_then(|()| self.newton(state, &ctx, self.settings.max_newton_iterations, true))
            {
                return Err(self.failure(f, &ctx));
            }
            self.commit(state, h, method, t);
        }
        Ok(())
    }
}

/// Tolerances and limits of envelope following.
#[derive(Clone, Debug, PartialEq)]
pub struct EnvelopeSettings {
    /// Relative tolerance on each state variable's error over one envelope step.
    /// Default 1e-5.
    pub reltol: f64,
    /// Absolute tolerance on capacitor voltages, volts. Default 20 uV.
    pub voltage_abstol: f64,
    /// Tolerance on winding currents, amperes (a winding's flux error is judged as the
    /// current it makes in its own inductance). Default 100 uA.
    pub current_abstol: f64,
    /// Fewest cycles an envelope step jumps (shorter ones are stepped in full). Default 4.
    pub min_cycles: usize,
    /// Most cycles one envelope step jumps. Default 100 000.
    pub max_cycles: usize,
    /// A step ends at most this fraction of the way to where a crossing function,
    /// extrapolated along the envelope, reaches zero. Default 0.5.
    pub crossing_margin: f64,
}

impl Default for EnvelopeSettings {
    fn default() -> Self {
        Self {
            reltol: 1e-5,
            voltage_abstol: 20e-6,
            current_abstol: 100e-6,
            min_cycles: 4,
            max_cycles: 100_000,
            crossing_margin: 0.5,
        }
    }
}

/// One boundary of a calm cycle: its time, continuous state and crossing maxima.
#[derive(Clone, Debug)]
struct Boundary {
    time: f64,
    state: Vec<f64>,
    crossing_max: Vec<f64>,
}

/// An accepted envelope step.
#[derive(Clone, Debug)]
pub struct Jump {
    /// Whole cycles jumped.
    pub cycles: usize,
    /// The state at the boundary the step reached, integration restarted: stepping one
    /// cycle on from it gives the checking cycle again, bit for bit (a caller that records
    /// waveforms steps it again with its observer).
    pub state: SimState,
    /// The state one cycle later, at the end of the checking cycle.
    pub end: SimState,
    /// What the checking cycle showed.
    pub summary: CycleSummary,
}

/// Follows the envelope of a mains-driven run (see the module documentation). Feed it
/// every cycle stepped in full ([`EnvelopeFollower::observe`]) and ask it for a step at
/// each boundary ([`EnvelopeFollower::try_step`]).
#[derive(Clone, Debug)]
pub struct EnvelopeFollower {
    period: f64,
    settings: EnvelopeSettings,
    slots: Vec<(usize, f64)>,
    /// Which state variables are fluxes of coupled windings.
    coupled: Vec<bool>,
    /// The last calm boundaries, oldest first (at most three, one cycle apart).
    calm: Vec<Boundary>,
    jacobian: Option<DMatrix<f64>>,
    /// How long an error in each variable lasts, in cycles, from the diagonal of the
    /// finite-difference monodromy matrix (before any Broyden correction, which keeps the
    /// drift's direction exact but not the diagonal): `1 / (1 - |J_ii|) - 1`.
    lasting: Vec<f64>,
    /// Cycles the next step tries.
    proposal: f64,
    /// How far the monodromy matrix missed the last observed increment (the largest
    /// ratio to the tolerance), before Broyden's correction: a step of `M` cycles is
    /// expected to miss by about `M/2` times this, so it caps `M`.
    model_error: f64,
    /// A tried step met a discrete change before this instant: until a change is seen,
    /// steps end well before it.
    change_before_s: f64,
    /// Accepted steps of the last cycle stepped in full, and the step counter at its end.
    cycle_steps: u64,
    steps_seen: u64,
    /// Boundaries to let pass before the next try, after a try that found no step.
    wait: usize,
    /// The wait after the next try that finds no step (doubles each time, up to 64).
    backoff: usize,
}

/// Newton-free check of one tried step.
enum Attempt {
    /// `error`: the part of the miss that grows with the step, as a ratio to the
    /// tolerance.
    Accepted {
        start: Box<SimState>,
        end: Box<SimState>,
        summary: CycleSummary,
        error: f64,
    },
    /// Too inexact by this error ratio (above 1).
    Inexact(f64),
    /// A discrete change or a region change in the checking cycle.
    Changed,
    /// The checking cycle took many times the steps of a cycle stepped in full (the
    /// restart lands where the step control struggles: a transistor hovering at its
    /// threshold), or the solver refused the jumped state: stepping on in full is
    /// cheaper, and safe.
    Costly,
}

impl EnvelopeFollower {
    /// A follower for runs of `sim` whose sources repeat every `period` seconds.
    pub fn new(sim: &Simulator, period: f64, settings: EnvelopeSettings) -> Self {
        Self {
            period,
            slots: sim.state_slots(&settings),
            coupled: sim.coupled_slots(),
            proposal: settings.min_cycles as f64 * 4.0,
            settings,
            calm: Vec::new(),
            jacobian: None,
            lasting: Vec::new(),
            model_error: f64::INFINITY,
            change_before_s: f64::INFINITY,
            cycle_steps: 0,
            steps_seen: 0,
            wait: 0,
            backoff: 1,
        }
    }

    fn vector(&self, state: &SimState) -> Vec<f64> {
        self.slots
            .iter()
            .map(|&(slot, _)| state.hist[slot])
            .collect()
    }

    /// Notes a cycle stepped in full that ended at `state`'s boundary. A cycle with a
    /// discrete change, or ending with a change pending, breaks the calm: the modes may
    /// differ, so the monodromy matrix is found afresh.
    pub fn observe(&mut self, state: &SimState, summary: &CycleSummary) {
        // A cycle taken from an envelope step's check was counted with the step's work.
        let steps = state.stats.accepted_steps;
        if steps > self.steps_seen {
            self.cycle_steps = steps - self.steps_seen;
        }
        self.steps_seen = steps;
        if summary.events > 0 || !state.pending.is_empty() {
            self.calm.clear();
            self.jacobian = None;
            return;
        }
        let boundary = Boundary {
            time: state.time,
            state: self.vector(state),
            crossing_max: summary.crossing_max.clone(),
        };
        if let Some(last) = self.calm.last() {
            if (boundary.time - last.time - self.period).abs() > 1e-6 * self.period {
                self.calm.clear();
            }
        }
        self.calm.push(boundary);
        if self.calm.len() > 3 {
            self.calm.remove(0);
        }
        if self.calm.len() == 3 {
            self.broyden();
        }
    }

    /// Corrects the monodromy matrix so that it maps the older of the last two increments
    /// onto the newer (Broyden's update).
    fn broyden(&mut self) {
        let tolerance = self.tolerance(&self.calm[1].state, &self.calm[2].state);
        let Some(j) = self.jacobian.as_mut() else {
            return;
        };
        let n = self.slots.len();
        let d0 = DVector::from_fn(n, |i, _| self.calm[1].state[i] - self.calm[0].state[i]);
        let d1 = DVector::from_fn(n, |i, _| self.calm[2].state[i] - self.calm[1].state[i]);
        let residual = &d1 - &*j * &d0;
        // A step of M cycles is expected to miss a variable by about min(M/2, lasting)
        // times this one-cycle residual: the cap on M is where that reaches the tolerance.
        self.model_error = residual
            .iter()
            .zip(&tolerance)
            .zip(&self.lasting)
            .map(|((r, t), &lasting)| {
                let ratio = r.abs() / t;
                if ratio * lasting <= 1.0 {
                    0.0
                } else {
                    ratio
                }
            })
            .fold(0.0, f64::max);
        let norm = d0.norm_squared();
        if norm > 0.0 {
            *j += residual * d0.transpose() / norm;
        }
    }

    /// The tolerance of each state variable at values `a` and `b`.
    fn tolerance(&self, a: &[f64], b: &[f64]) -> Vec<f64> {
        self.slots
            .iter()
            .zip(a.iter().zip(b))
            .map(|(&(_, abstol), (x, y))| {
                // A winding's flux (negative marker) is judged on its current alone.
                if abstol < 0.0 {
                    -abstol
                } else {
                    self.settings.reltol * x.abs().max(y.abs()) + abstol
                }
            })
            .collect()
    }

    /// Tries an envelope step from `state`, which must be the boundary of the last cycle
    /// passed to [`EnvelopeFollower::observe`]. The step ends at least one cycle before
    /// `horizon_s`; with `settle_below` (a relative drift per cycle) it also ends before
    /// the predicted drift falls below it, so that settling is judged on cycles stepped in
    /// full. Returns `None` when no step is worth taking or none passed its check; the work
    /// of finding out is added to `state`'s counters either way.
    pub fn try_step(
        &mut self,
        sim: &mut Simulator,
        state: &mut SimState,
        horizon_s: f64,
        settle_below: Option<f64>,
    ) -> Result<Option<Jump>, SimError> {
        if self.wait > 0 {
            self.wait -= 1;
            return Ok(None);
        }
        let Some(mut cycles) = self.allowed_cycles(sim, state, horizon_s) else {
            return Ok(None);
        };
        let before = state.stats;
        let mut work = RunStats::default();
        if self.jacobian.is_none() {
            // A shortcut never makes a run fail: a matrix that cannot be found (a nudged
            // state the solver refuses) only means no envelope step for a while.
            if self.monodromy(sim, state, &mut work).is_err() {
                self.jacobian = None;
                self.wait = MAX_WAIT;
            }
            // The matrix is judged on the next pair of calm cycles.
            state.stats = before;
            add_work(&mut state.stats, &work);
            self.steps_seen = state.stats.accepted_steps;
            return Ok(None);
        }
        if self.model_error > 0.0 {
            cycles = cycles.min((2.0 / self.model_error).floor() as usize);
        }
        let last = self.calm.len() - 1;
        let d = DVector::from_fn(self.slots.len(), |i, _| {
            self.calm[last].state[i] - self.calm[last - 1].state[i]
        });
        if let Some(threshold) = settle_below {
            cycles = cycles.min(self.cycles_to_settle(&d, threshold));
        }
        let mut outcome = None;
        while cycles >= self.settings.min_cycles {
            match self.attempt(sim, state, &d, cycles, &mut work)? {
                Attempt::Accepted {
                    start,
                    end,
                    summary,
                    error,
                } => {
                    self.backoff = 1;
                    let grow = (0.9 / error.max(1e-6).sqrt()).clamp(0.5, 2.0);
                    self.proposal = (cycles as f64 * grow).max(self.settings.min_cycles as f64);
                    // The jumped boundary is the first of the new calm stretch.
                    self.calm = vec![Boundary {
                        time: start.time,
                        state: self.vector(&start),
                        crossing_max: summary.crossing_max.clone(),
                    }];
                    outcome = Some(Jump {
                        cycles,
                        state: *start,
                        end: *end,
                        summary,
                    });
                    break;
                }
                Attempt::Inexact(error) => {
                    let shrink = (0.9 / error.sqrt()).clamp(0.1, 0.7);
                    cycles = (cycles as f64 * shrink).floor() as usize;
                    self.proposal = cycles as f64;
                }
                Attempt::Costly => {
                    self.backoff = MAX_WAIT;
                    break;
                }
                Attempt::Changed => {
                    let at = state.time + (cycles + 1) as f64 * self.period;
                    self.change_before_s = self.change_before_s.min(at);
                    cycles /= 2;
                    self.proposal = cycles as f64;
                }
            }
        }
        // The next ordinary cycle's steps are counted from here, not with this work.
        self.steps_seen = before.accepted_steps + work.accepted_steps;
        match outcome.as_mut() {
            Some(jump) => {
                for target in [&mut jump.state, &mut jump.end] {
                    target.stats = before;
                    add_work(&mut target.stats, &work);
                    target.stats.skipped_s += jump.cycles as f64 * self.period;
                    target.stats.envelope_steps += 1;
                    target.stats.cycles_jumped += jump.cycles as u64;
                }
            }
            None => {
                state.stats = before;
                add_work(&mut state.stats, &work);
                // Trying at every boundary would cost a checking cycle each.
                self.wait = self.backoff;
                self.backoff = (self.backoff * 2).min(MAX_WAIT);
            }
        }
        Ok(outcome)
    }

    /// How many cycles a step from `state` may jump, before the tolerance decides: `None`
    /// when the last two cycles were not calm, a crossing function is at zero or the room
    /// left is under the fewest worth a step.
    fn allowed_cycles(
        &mut self,
        sim: &Simulator,
        state: &SimState,
        horizon_s: f64,
    ) -> Option<usize> {
        let [.., prev, last] = self.calm.as_slice() else {
            return None;
        };
        if (last.time - state.time).abs() > 1e-9 * self.period || !state.pending.is_empty() {
            return None;
        }
        let breakpoint = sim.next_breakpoint(state).min(horizon_s);
        let room = ((breakpoint - state.time) / self.period - 1e-9).floor() - 1.0;
        if state.time >= self.change_before_s {
            // Stepped in full past where the change was met.
            self.change_before_s = f64::INFINITY;
        }
        let before_change = self.settings.crossing_margin
            * ((self.change_before_s - state.time) / self.period - 1.0);
        let proposal = self.proposal.max(self.settings.min_cycles as f64);
        let mut cycles = room
            .min(proposal)
            .min(before_change)
            .min(self.settings.max_cycles as f64);
        if self.jacobian.is_none() {
            cycles = room;
        }
        for (&c, &c_prev) in last.crossing_max.iter().zip(&prev.crossing_max) {
            if c >= 0.0 {
                return None;
            }
            let rise = c - c_prev;
            if rise > 0.0 {
                cycles = cycles.min(self.settings.crossing_margin * -c / rise);
            }
        }
        (cycles >= self.settings.min_cycles as f64).then_some(cycles.floor() as usize)
    }

    /// The monodromy matrix at `state` by finite differences: one cycle of ordinary
    /// stepping from the state gives the instants of its steps; then the state itself and
    /// the state with each variable nudged are stepped through exactly those instants (no
    /// error control, so that the differences carry no noise from step choices).
    fn monodromy(
        &mut self,
        sim: &mut Simulator,
        state: &SimState,
        work: &mut RunStats,
    ) -> Result<(), SimError> {
        let x = self.vector(state);
        let mut times = Instants(Vec::new());
        let start = sim.jumped(state, &self.slots, &x, 0.0)?;
        let mut end = start.clone();
        sim.advance(&mut end, start.time + self.period, &mut times)?;
        add_difference(work, &end.stats, &state.stats);
        let mut grid_cycle = |sim: &mut Simulator, y: &[f64]| -> Result<Vec<f64>, SimError> {
            let mut run = sim.jumped(state, &self.slots, y, 0.0)?;
            sim.step_through(&mut run, &times.0)?;
            add_difference(work, &run.stats, &state.stats);
            Ok(self.vector(&run))
        };
        let base = grid_cycle(sim, &x)?;
        let n = self.slots.len();
        let mut j = DMatrix::zeros(n, n);
        for i in 0..n {
            let delta = DELTA * x[i].abs() + 100.0 * DELTA * self.slots[i].1.abs();
            let mut y = x.clone();
            y[i] += delta;
            let column = grid_cycle(sim, &y)?;
            for r in 0..n {
                j[(r, i)] = (column[r] - base[r]) / delta;
            }
        }
        work.envelope_cycles += n as u64 + 2;
        self.lasting = (0..n)
            .map(|i| 1.0 / (1.0 - j[(i, i)].abs().min(1.0 - 1e-9)) - 1.0)
            .collect();
        self.jacobian = Some(j);
        if self.calm.len() == 3 {
            self.broyden();
        }
        Ok(())
    }

    /// One ordinary cycle from `state` moved `cycles` cycles on with its continuous state
    /// set to `y`: the continuous state at its end, what the cycle showed, the jumped
    /// state it started from and the state at its end.
    fn cycle_from(
        &mut self,
        sim: &mut Simulator,
        state: &SimState,
        y: &[f64],
        cycles: usize,
        work: &mut RunStats,
    ) -> Result<(Vec<f64>, CycleSummary, SimState, SimState), SimError> {
        let start = sim.jumped(state, &self.slots, y, cycles as f64 * self.period)?;
        let mut end = start.clone();
        let summary = sim.advance_cycle(&mut end, start.time + self.period, &mut ())?;
        add_difference(work, &end.stats, &state.stats);
        work.envelope_cycles += 1;
        Ok((self.vector(&end), summary, start, end))
    }

    /// Jumps `cycles` cycles with the increment `d` and checks the step with one cycle.
    fn attempt(
        &mut self,
        sim: &mut Simulator,
        state: &SimState,
        d: &DVector<f64>,
        cycles: usize,
        work: &mut RunStats,
    ) -> Result<Attempt, SimError> {
        let j = self.jacobian.clone().expect("found before any attempt");
        // y = x + (J + ... + J^M) d; the increment one cycle later J^(M+1) d.
        let mut power_d = d.clone();
        let mut sum = DVector::zeros(d.len());
        for _ in 0..cycles {
            power_d = &j * &power_d;
            sum += &power_d;
        }
        let predicted = &j * &power_d;
        let x = self.calm[self.calm.len() - 1].state.clone();
        // A variable that settles within a cycle follows the slow ones by itself in the
        // checking cycle; extrapolating it through the matrix's least exact part (a peak
        // detector's diode, a coil fed by a transistor near its threshold) only disturbs
        // it. Coupled windings' fluxes move together or not at all.
        let y: Vec<f64> = (0..x.len())
            .map(|i| {
                if self.lasting[i] < FAST_LASTING && !self.coupled[i] {
                    x[i]
                } else {
                    x[i] + sum[i]
                }
            })
            .collect();
        let Ok((end, summary, start, end_state)) = self.cycle_from(sim, state, &y, cycles, work)
        else {
            // The jumped state is one the solver refuses: the step is not taken, and the
            // run goes on with ordinary cycles.
            return Ok(Attempt::Costly);
        };

        let changed = summary.events > 0
            || !end_state.pending.is_empty()
            || summary.crossing_max.iter().any(|&c| c >= 0.0)
            || sim.regimes(&end_state.x) != sim.regimes(&state.x);
        let check_steps = end_state.stats.accepted_steps - start.stats.accepted_steps;
        if !changed && check_steps > COSTLY_FACTOR * self.cycle_steps.max(1) {
            return Ok(Attempt::Costly);
        }
        if changed {
            return Ok(Attempt::Changed);
        }
        let tolerance = self.tolerance(&x, &y);
        // A miss in a variable that its own dynamics pull back within a cycle or two does
        // not pile up over the step: weigh each by the cycles its errors last, at most M/2.
        let half = cycles as f64 / 2.0;
        // Misses of variables whose errors outlast half the step grow with the step (as
        // its square: an inexact rate summed over M cycles); the others are a step's
        // fixed cost (the restart) and do not shrink with it.
        let (mut error, mut growing) = (0.0_f64, 0.0_f64);
        for i in 0..y.len() {
            let miss = ((end[i] - y[i]) - predicted[i]).abs() / tolerance[i];
            if self.lasting[i] >= half {
                growing = growing.max(half.max(1.0) * miss);
                error = error.max(half.max(1.0) * miss);
            } else {
                error = error.max(self.lasting[i] * miss);
            }
        }
        if error > 1.0 {
            return Ok(Attempt::Inexact(error));
        }
        Ok(Attempt::Accepted {
            start: Box::new(start),
            end: Box::new(end_state),
            summary,
            error: growing,
        })
    }

    /// Cycles until the drift per cycle, `J^m d`, falls below `threshold` of each value
    /// (the settling test's measure): a step stops one cycle short of it.
    fn cycles_to_settle(&self, d: &DVector<f64>, threshold: f64) -> usize {
        let j = self.jacobian.as_ref().expect("found before any attempt");
        let x = &self.calm[self.calm.len() - 1].state;
        let mut drift = d.clone();
        let mut level: Vec<f64> = x.clone();
        let limit = self.settings.max_cycles;
        for m in 0..limit {
            let quiet = drift
                .iter()
                .zip(&level)
                .all(|(dv, v)| dv.abs() <= threshold * v.abs().max(1.0));
            if quiet {
                return m.saturating_sub(1);
            }
            for (v, dv) in level.iter_mut().zip(drift.iter()) {
                *v += dv;
            }
            drift = j * &drift;
        }
        limit
    }
}

/// Adds the counters of `work` to `stats` (skipped time excepted).
fn add_work(stats: &mut RunStats, work: &RunStats) {
    stats.accepted_steps += work.accepted_steps;
    stats.rejected_steps += work.rejected_steps;
    stats.newton_failures += work.newton_failures;
    stats.newton_iterations += work.newton_iterations;
    stats.factorizations += work.factorizations;
    stats.reorders += work.reorders;
    stats.stepping_solves += work.stepping_solves;
    stats.restarts += work.restarts;
    stats.located_events += work.located_events;
    stats.envelope_cycles += work.envelope_cycles;
}

/// Adds to `work` what a run did between counters `before` and `after`.
fn add_difference(work: &mut RunStats, after: &RunStats, before: &RunStats) {
    work.accepted_steps += after.accepted_steps - before.accepted_steps;
    work.rejected_steps += after.rejected_steps - before.rejected_steps;
    work.newton_failures += after.newton_failures - before.newton_failures;
    work.newton_iterations += after.newton_iterations - before.newton_iterations;
    work.factorizations += after.factorizations - before.factorizations;
    work.reorders += after.reorders - before.reorders;
    work.stepping_solves += after.stepping_solves - before.stepping_solves;
    work.restarts += after.restarts - before.restarts;
    work.located_events += after.located_events - before.located_events;
}

const DELTA: f64 = 1e-5;

/// A variable whose errors last fewer cycles than this is not extrapolated.
const FAST_LASTING: f64 = 1.0;

/// A checking cycle that takes more than this many times the steps of a cycle stepped in
/// full ends envelope following for a while (see `Attempt::Costly`).
const COSTLY_FACTOR: u64 = 4;

/// The longest wait, in boundaries, between tries that find no step.
const MAX_WAIT: usize = 256;
