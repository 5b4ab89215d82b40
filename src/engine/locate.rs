//! Discrete events: crossing functions located by the Illinois method, scheduled changes.

use super::*;

impl Simulator {
    /// The largest crossing function over the discrete devices at `x`.
    pub(super) fn crossing(&self, x: &[f64], modes: &[Mode]) -> f64 {
        self.network
            .discrete_devices
            .iter()
            .filter_map(|&d| self.network.devices[d].crossing(x, modes[d]))
            .fold(f64::NEG_INFINITY, f64::max)
    }

    /// Changes the mode of every device whose crossing function is positive at the present
    /// state; returns whether any changed.
    pub(super) fn apply_crossings<O: Observer + ?Sized>(
        &self,
        state: &mut SimState,
        observer: &mut O,
    ) -> bool {
        let mut any = false;
        for &d in &self.network.discrete_devices {
            let device = &self.network.devices[d];
            if device.crossing(&state.x, state.modes[d]).unwrap_or(0.0) > 0.0 {
                if let Some(kind) =
                    device.cross(d, state.time, &mut state.modes[d], &mut state.pending)
                {
                    any = true;
                    observer.event(
                        &self.network,
                        &DiscreteEvent {
                            time: state.time,
                            part: self.network.device_part[d],
                            kind,
                        },
                    );
                }
            }
        }
        any | self.apply_due(state, observer)
    }

    /// Applies every scheduled change due at or before the present time, in order;
    /// returns whether any was.
    pub(super) fn apply_due<O: Observer + ?Sized>(
        &self,
        state: &mut SimState,
        observer: &mut O,
    ) -> bool {
        let now = state.time + 1e-13 * state.time.abs().max(1e-6);
        let mut any = false;
        let mut k = 0;
        while k < state.pending.len() {
            let s = state.pending[k];
            if s.time <= now {
                state.pending.remove(k);
                let device = &self.network.devices[s.device];
                if let Some(kind) = device.apply_scheduled(s.action, &mut state.modes[s.device]) {
                    any = true;
                    observer.event(
                        &self.network,
                        &DiscreteEvent {
                            time: state.time,
                            part: self.network.device_part[s.device],
                            kind,
                        },
                    );
                }
            } else {
                k += 1;
            }
        }
        any
    }

    /// Locates the first instant in the step where a crossing function turns positive
    /// (Illinois false position), leaving that solution in `ws.x_sol`; returns the step.
    pub(super) fn locate(
        &mut self,
        state: &mut SimState,
        h: f64,
        method: Method,
    ) -> Result<f64, NewtonFailure> {
        let (mut ta, mut fa) = (0.0, self.crossing(&state.x, &state.modes).min(0.0));
        let (mut tb, mut fb) = (h, self.crossing(&self.ws.x_sol, &state.modes));
        self.ws.x_keep.copy_from_slice(&self.ws.x_sol);
        let mut side = 0;
        while tb - ta > self.settings.event_tolerance_s {
            let width = tb - ta;
            let mut tm = ta + width * (-fa) / (fb - fa);
            if !tm.is_finite() {
                tm = ta + 0.5 * width;
            }
            tm = tm.clamp(ta + 0.01 * width, tb - 0.01 * width);
            // Avoid creeping from one side: finish with a bisection-sized bracket.
            if width < 4.0 * self.settings.event_tolerance_s {
                tm = ta + 0.5 * width;
            }
            self.solve_step(state, tm, method, false)?;
            let fm = self.crossing(&self.ws.x_sol, &state.modes);
            if fm > 0.0 {
                tb = tm;
                fb = fm;
                self.ws.x_keep.copy_from_slice(&self.ws.x_sol);
                if side == -1 {
                    fa *= 0.5;
                }
                side = -1;
            } else {
                ta = tm;
                fa = fm;
                if side == 1 {
                    fb *= 0.5;
                }
                side = 1;
            }
        }
        self.ws.x_sol.copy_from_slice(&self.ws.x_keep);
        state.stats.located_events += 1;
        Ok(tb)
    }
}
