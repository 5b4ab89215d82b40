//! Step control: the truncation-error test, junction corners, breakpoints and the advance loop.

use super::*;

impl Simulator {
    /// Ratio of the estimated local truncation error of the step to its tolerance.
    pub(super) fn truncation_error(&self, state: &SimState, h: f64) -> f64 {
        let dim = state.x.len();
        let (x3, x2) = (&self.ws.x_sol, &state.x);
        let (x1, x0) = (&state.past_x[..dim], &state.past_x[dim..]);
        let t2 = state.time;
        let t3 = t2 + h;
        let (t1, t0) = (state.past_t[0], state.past_t[1]);
        let s = &self.settings;
        let mut worst = 0.0_f64;
        for &(p, q, is_current) in &self.network.error_probes {
            let value = |x: &[f64]| if is_current { x[p] } else { x[p] - x[q] };
            let (v0, v1, v2, v3) = (value(x0), value(x1), value(x2), value(x3));
            let d01 = (v1 - v0) / (t1 - t0);
            let d12 = (v2 - v1) / (t2 - t1);
            let d23 = (v3 - v2) / (t3 - t2);
            let d012 = (d12 - d01) / (t2 - t0);
            let d123 = (d23 - d12) / (t3 - t1);
            let d0123 = (d123 - d012) / (t3 - t0);
            // Trapezoidal rule: LTE = h^3 x''' / 12, with x''' ~ 6 x[t0..t3].
            let lte = 0.5 * h * h * h * d0123.abs();
            let abstol = if is_current {
                s.lte_current_abstol
            } else {
                s.lte_voltage_abstol
            };
            let tol = s.lte_reltol * v3.abs().max(v2.abs()) + abstol;
            worst = worst.max(lte / tol);
        }
        let ctx = self.context(t3, h, Method::Trapezoidal);
        for d in &self.network.devices {
            if let Some((lte, magnitude, abstol)) = d.derivative_error(
                &ctx,
                x3,
                &state.hist,
                t2 - t1,
                s.lte_voltage_abstol,
                s.lte_current_abstol,
            ) {
                worst = worst.max(lte / (s.lte_reltol * magnitude + abstol));
            }
        }
        worst
    }

    /// Makes `ws.x_sol` the state at `time + h`.
    pub(super) fn commit(&mut self, state: &mut SimState, h: f64, method: Method, new_time: f64) {
        let ctx = self.context(new_time, h, method);
        for d in &self.network.devices {
            d.commit(&ctx, &self.ws.x_sol, &mut state.hist);
        }
        let dim = state.x.len();
        state.past_x.copy_within(0..dim, dim);
        state.past_x[..dim].copy_from_slice(&state.x);
        state.past_t[1] = state.past_t[0];
        state.past_t[0] = state.time;
        state.x.copy_from_slice(&self.ws.x_sol);
        state.time = new_time;
        state.points_since_break += 1;
        state.stats.accepted_steps += 1;
    }

    /// Restarts integration after a discontinuity: damped first step, short step.
    pub(super) fn restart(&self, state: &mut SimState) {
        state.points_since_break = 1;
        state.step = self.settings.restart_step_s;
        state.stats.restarts += 1;
    }

    /// Whether any device changed operating region between the state and the solution in
    /// the workspace (see `Device::regime`).
    pub(super) fn region_changed(&self, state: &SimState) -> bool {
        let on = self.settings.corner_current_a;
        self.network.regime_devices.iter().any(|&d| {
            let device = &self.network.devices[d];
            device.regime(&state.x, on) != device.regime(&self.ws.x_sol, on)
        })
    }

    /// Where, as a fraction of the step, the first device changes region, on the straight
    /// line from the state to the solution in the workspace (bisection to 1/1024 of the
    /// step; the last fraction known to be before the change).
    pub(super) fn corner_fraction(&mut self, state: &SimState) -> f64 {
        let on = self.settings.corner_current_a;
        let (mut before, mut after) = (0.0, 1.0);
        for _ in 0..10 {
            let mid = 0.5 * (before + after);
            for ((p, a), b) in self.ws.x_line.iter_mut().zip(&state.x).zip(&self.ws.x_sol) {
                *p = a + mid * (b - a);
            }
            let network = &self.network;
            let changed = network.regime_devices.iter().any(|&d| {
                let device = &network.devices[d];
                device.regime(&state.x, on) != device.regime(&self.ws.x_line, on)
            });
            if changed {
                after = mid;
            } else {
                before = mid;
            }
        }
        before
    }

    /// The next instant after the state's time where a source is not smooth or a
    /// scheduled change is due.
    pub(super) fn next_breakpoint(&self, state: &SimState) -> f64 {
        let t = state.time;
        let eps = 1e-14 * t.abs().max(1e-3);
        let sources = self
            .network
            .devices
            .iter()
            .map(|d| d.next_breakpoint(t + eps))
            .fold(f64::INFINITY, f64::min);
        state
            .pending
            .iter()
            .map(|s| s.time)
            .filter(|&time| time > t + eps)
            .fold(sources, f64::min)
    }

    /// Integrates `state` forward to `t_end`, reporting to `observer`.
    pub fn advance<O: Observer + ?Sized>(
        &mut self,
        state: &mut SimState,
        t_end: f64,
        observer: &mut O,
    ) -> Result<(), SimError> {
        let time_eps = |t: f64| 1e-13 * t.abs().max(1e-6);
        let mut cascade = 0;
        let mut watchdog = Watchdog::new(state);
        while t_end - state.time > time_eps(t_end) {
            if watchdog.pass() {
                watchdog.judge(self, state)?;
            }
            if !self.network.discrete_devices.is_empty() {
                if self.apply_crossings(state, observer) && cascade < 64 {
                    cascade += 1;
                    self.restart(state);
                    continue;
                }
                cascade = 0;
            }
            let breakpoint = self.next_breakpoint(state);
            let stop = t_end.min(breakpoint);
            let method = if state.points_since_break <= 1 {
                Method::BackwardEuler
            } else {
                Method::Trapezoidal
            };
            let remaining = stop - state.time;
            if remaining < self.settings.event_tolerance_s * NEGLIGIBLE_FRACTION {
                // A sliver of time left by rounding (a caller's stopping time a few ulps
                // before a breakpoint): too short to solve, since companion conductances
                // like 2C/h then amplify rounding beyond any current tolerance, and too
                // short to matter. Cross it without a solve.
                state.time = stop;
                if stop == breakpoint {
                    self.apply_due(state, observer);
                    self.restart(state);
                }
                continue;
            }
            let (mut h, mut lands) = self.step_toward(state, remaining);
            let at_breakpoint = lands && stop == breakpoint;
            if let Err(f) = self.solve_step(state, h, method, at_breakpoint) {
                state.stats.newton_failures += 1;
                if matches!(f, NewtonFailure::Singular(_)) || h / 8.0 < self.settings.min_step_s {
                    let ctx = self.context(state.time + h, h, method);
                    return Err(self.failure(f, &ctx));
                }
                state.step = h / 8.0;
                continue;
            }
            let Some(growth) = self.error_control(state, h, method)? else {
                continue;
            };
            let corner = self.settings.corner_step_s > 0.0 && self.region_changed(state);
            if corner && h > self.settings.corner_step_s * (1.0 + 1e-9) {
                self.step_to_corner(state, h);
                continue;
            }
            let mut transition = false;
            if !self.network.discrete_devices.is_empty()
                && self.crossing(&self.ws.x_sol, &state.modes) > 0.0
            {
                h = match self.locate(state, h, method) {
                    Ok(h) => h,
                    Err(f) => {
                        let ctx = self.context(state.time + h, h, method);
                        return Err(self.failure(f, &ctx));
                    }
                };
                lands = false;
                transition = true;
            }
            let new_time = if lands { stop } else { state.time + h };
            self.commit(state, h, method, new_time);
            observer.step(&self.network, state);
            let at_breakpoint = lands && stop == breakpoint;
            self.after_commit(
                state,
                observer,
                h,
                growth,
                transition,
                at_breakpoint,
                corner,
            );
        }
        Ok(())
    }

    /// The next step's length toward a stop `remaining` seconds away, and whether it lands
    /// on the stop: the proposed step (at most the maximum), the whole remainder when it
    /// would reach it, or half of it when it would leave a sliver.
    fn step_toward(&self, state: &SimState, remaining: f64) -> (f64, bool) {
        let h = state.step.min(self.settings.max_step_s);
        if h >= remaining * (1.0 - 1e-9) {
            (remaining, true)
        } else if h > 0.5 * remaining {
            (0.5 * remaining, false)
        } else {
            (h, false)
        }
    }

    /// The truncation-error test of a solved step of length `h`: the growth factor for the
    /// next step, or `None` when the step is rejected (the next attempt already
    /// shortened). Before the error estimate is available (just after a restart) the step
    /// grows fast: the restart step is deliberately tiny.
    fn error_control(
        &self,
        state: &mut SimState,
        h: f64,
        method: Method,
    ) -> Result<Option<f64>, SimError> {
        let mut growth = if h < self.settings.corner_step_s {
            4.0
        } else {
            2.0
        };
        if method == Method::Trapezoidal && state.points_since_break >= 3 {
            let err = self.truncation_error(state, h);
            let factor = 0.9 * err.max(1e-12).powf(-1.0 / 3.0);
            if err > 1.0 {
                state.stats.rejected_steps += 1;
                state.just_rejected = true;
                state.step = h * factor.clamp(0.1, 0.5);
                if state.step < self.settings.min_step_s {
                    let ctx = self.context(state.time + h, h, method);
                    return Err(self.failure(NewtonFailure::Diverged, &ctx));
                }
                return Ok(None);
            }
            // Right after a rejection the estimate is least trusted: do not grow.
            growth = factor.min(if state.just_rejected { 1.0 } else { 2.0 });
            state.just_rejected = false;
        }
        Ok(Some(growth))
    }

    /// Rejects a long step of length `h` inside which a device changed region: the next
    /// attempt steps to just before the corner (located on the straight line between the
    /// two solutions), then through it with a corner-length step.
    fn step_to_corner(&mut self, state: &mut SimState, h: f64) {
        state.stats.rejected_steps += 1;
        state.just_rejected = true;
        let corner_step = self.settings.corner_step_s;
        let before = self.corner_fraction(state) * h - 0.5 * corner_step;
        if before > corner_step {
            state.step = before;
            state.corner_ahead = true;
        } else {
            state.step = corner_step;
            state.corner_ahead = false;
        }
    }

    /// After a committed step of length `h`: the discrete changes it crossed or landed on,
    /// the restarts they call for, and the next step's length.
    #[allow(clippy::too_many_arguments)]
    fn after_commit<O: Observer + ?Sized>(
        &mut self,
        state: &mut SimState,
        observer: &mut O,
        h: f64,
        growth: f64,
        transition: bool,
        at_breakpoint: bool,
        corner: bool,
    ) {
        if transition {
            self.apply_crossings(state, observer);
            self.restart(state);
        } else if at_breakpoint {
            self.apply_due(state, observer);
            self.restart(state);
        } else if corner {
            // Restart with a damped step so the trapezoidal rule does not carry the
            // pre-corner current across it.
            state.points_since_break = 1;
            state.step = self.settings.corner_step_s;
            state.stats.restarts += 1;
        } else if state.corner_ahead {
            state.step = self.settings.corner_step_s;
        } else {
            state.step = h * growth;
        }
        state.corner_ahead = false;
    }
}

/// Watches the step loop's progress: every [`STALL_WINDOW`] passes, the simulated time they
/// covered must average at least [`Settings::min_average_step_s`].
struct Watchdog {
    passes: u64,
    since_time: f64,
    since_events: u64,
}

impl Watchdog {
    fn new(state: &SimState) -> Self {
        Self {
            passes: 0,
            since_time: state.time,
            since_events: state.stats.located_events,
        }
    }

    /// Counts one pass; true when a window is complete and must be judged.
    fn pass(&mut self) -> bool {
        self.passes += 1;
        self.passes >= STALL_WINDOW
    }

    /// Judges a complete window and starts the next.
    fn judge(&mut self, sim: &Simulator, state: &SimState) -> Result<(), SimError> {
        let span = state.time - self.since_time;
        let average = span / self.passes as f64;
        let min = sim.settings.min_average_step_s;
        if average < min {
            return Err(sim.stalled(
                state,
                self.passes,
                span,
                state.stats.located_events - self.since_events,
            ));
        }
        *self = Watchdog::new(state);
        Ok(())
    }
}

impl Simulator {
    /// The error of a stalled run, naming the unknown that moved fastest in the last step
    /// against its tolerance, and the parts around it.
    fn stalled(&self, state: &SimState, passes: u64, span: f64, events: u64) -> SimError {
        let network = &self.network;
        let nodes = network.circuit.nodes.len();
        let h = (state.time - state.past_t[0]).max(f64::MIN_POSITIVE);
        let previous = &state.past_x[..network.dim()];
        let tolerance = |i: usize, x: f64| {
            let abstol = if i < nodes {
                self.settings.voltage_abstol
            } else {
                self.settings.current_abstol
            };
            self.settings.reltol * x.abs() + abstol
        };
        let fastest = (1..network.dim())
            .max_by(|&a, &b| {
                let rate = |i: usize| (state.x[i] - previous[i]).abs() / tolerance(i, state.x[i]);
                rate(a).total_cmp(&rate(b))
            })
            .unwrap_or(1);
        let change = (state.x[fastest] - previous[fastest]).abs();
        let time_constant_s = if change > 0.0 {
            h * state.x[fastest].abs().max(tolerance(fastest, 0.0)) / change
        } else {
            h
        };
        SimError::Stalled(Box::new(Stall {
            time_s: state.time,
            passes,
            span_s: span,
            average_s: span / passes as f64,
            min_average_s: self.settings.min_average_step_s,
            events,
            fastest: format!(
                "`{}` of {}",
                network.unknown_name(fastest),
                network.unknown_owner(fastest)
            ),
            time_constant_s,
            involved: self.involved(&[fastest]),
        }))
    }
}
