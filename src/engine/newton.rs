//! Newton-Raphson on the assembled companion models, with damping and its failures.

use super::*;

impl Simulator {
    /// Assembles the linearised system at `x` into the workspace.
    pub(super) fn assemble(
        &mut self,
        ctx: &SolveContext,
        hist: &[f64],
        modes: &[Mode],
        x_is_next: bool,
    ) {
        let ws = &mut self.ws;
        for &k in ws.lu.entries() {
            ws.a[k] = 0.0;
        }
        ws.b.iter_mut().for_each(|v| *v = 0.0);
        let dim = self.network.dim();
        let x = if x_is_next { &ws.x_next } else { &ws.x_sol };
        let mut m = Mna {
            dim,
            a: &mut ws.a,
            b: &mut ws.b,
            structural: false,
        };
        for (i, d) in self.network.devices.iter().enumerate() {
            d.stamp(&mut m, ctx, x, hist, modes[i], &mut ws.scratch);
        }
        for i in 1..self.network.circuit.nodes.len() {
            ws.a[i * dim + i] += ctx.shunt;
        }
    }

    /// Newton-Raphson for one instant. The starting guess is `state.x` (or, with
    /// `from_sol`, the workspace's present solution); the result is left in `ws.x_sol`.
    pub(super) fn newton(
        &mut self,
        state: &mut SimState,
        ctx: &SolveContext,
        max_iterations: usize,
        from_sol: bool,
    ) -> Result<(), NewtonFailure> {
        if !from_sol {
            self.ws.x_sol.copy_from_slice(&state.x);
        }
        self.newton_from_guess(state, ctx, max_iterations)
    }

    pub(super) fn newton_from_guess(
        &mut self,
        state: &mut SimState,
        ctx: &SolveContext,
        max_iterations: usize,
    ) -> Result<(), NewtonFailure> {
        // Junction limiting is anchored at the last accepted solution, not at the
        // extrapolated guess, so a predictor overshoot cannot start a junction far forward.
        for d in &self.network.devices {
            d.begin_newton(&state.x, &self.ws.x_sol, &mut self.ws.scratch);
        }
        let node_count = self.network.circuit.nodes.len();
        let dim = self.network.dim();
        for iteration in 0..max_iterations {
            self.assemble(ctx, &state.hist, &state.modes, false);
            state.stats.newton_iterations += 1;
            state.stats.factorizations += 1;
            let keep_matrix = iteration >= 2;
            if keep_matrix {
                self.ws.a_copy.copy_from_slice(&self.ws.a);
            }
            if self.ws.lu.refactor(&mut self.ws.a).is_err() {
                // The kept pivot order no longer suits the values: assemble again (the
                // failed attempt overwrote part of the matrix) and choose a new order.
                self.assemble(ctx, &state.hist, &state.modes, false);
                state.stats.reorders += 1;
                if let Err(Singular { unknown }) = self.ws.lu.factor_choosing_order(&mut self.ws.a)
                {
                    return Err(NewtonFailure::Singular(unknown));
                }
            }
            let ws = &mut self.ws;
            ws.x_next.copy_from_slice(&ws.b);
            ws.lu.solve(&ws.a, &mut ws.x_next, &mut ws.work);
            if !self.network.nonlinear {
                std::mem::swap(&mut ws.x_sol, &mut ws.x_next);
                return Ok(());
            }
            let mut converged = true;
            for i in 1..dim {
                let (new, old) = (ws.x_next[i], ws.x_sol[i]);
                if !new.is_finite() {
                    return Err(NewtonFailure::Diverged);
                }
                let abstol = if i < node_count {
                    self.settings.voltage_abstol
                } else {
                    self.settings.current_abstol
                };
                let allowed = self.settings.reltol * new.abs().max(old.abs()) + abstol;
                ws.update[i] = (new - old).abs() / allowed;
                if ws.update[i] > 1.0 {
                    converged = false;
                }
            }
            // Residual test: a node held only by tiny conductances (a transformer winding
            // floating behind reverse-biased diodes) has its voltage set by picoamperes and
            // its update never settles below the voltage tolerance in floating point. When
            // the update implies only negligible currents (A dx small), the previous iterate
            // already satisfied the circuit equations.
            // A row's terms are only known to its rounding level (a few ulps of its largest
            // term): over a very short step a reservoir capacitor's companion 2C/h makes
            // that level larger than any current tolerance, and a residual below it says
            // nothing more.
            if !converged && keep_matrix {
                converged = (1..dim).all(|i| {
                    let row = &ws.a_copy[i * dim..(i + 1) * dim];
                    let mut r = 0.0;
                    let mut scale = ws.b[i].abs();
                    for ((a, next), old) in row.iter().zip(&ws.x_next).zip(&ws.x_sol).skip(1) {
                        r += a * (next - old);
                        scale = scale.max((a * old).abs());
                    }
                    let tol = if i < node_count {
                        self.settings.current_abstol
                    } else {
                        self.settings.voltage_abstol
                    };
                    r.abs() <= tol + ROUNDING_ULPS * f64::EPSILON * scale
                });
            }
            if converged {
                converged = self.network.devices.iter().all(|d| {
                    d.converged(
                        &ws.x_next,
                        &ws.scratch,
                        ctx.gmin,
                        self.settings.reltol,
                        self.settings.current_abstol,
                    )
                });
            }
            std::mem::swap(&mut ws.x_sol, &mut ws.x_next);
            if converged {
                // A node voltage or branch current beyond any physical value means the
                // circuit leaves it undetermined (held only by gmin).
                if let Some(i) = (1..dim).find(|&i| ws.x_sol[i].abs() > IMPLAUSIBLE) {
                    return Err(NewtonFailure::Singular(i));
                }
                return Ok(());
            }
        }
        Err(NewtonFailure::Diverged)
    }

    /// Turns a Newton failure into an error naming the unknowns, nodes and parts.
    /// The owners of `unknowns` and the parts attached to those that are nodes.
    pub(super) fn involved(&self, unknowns: &[usize]) -> Vec<String> {
        let mut involved: Vec<String> = unknowns
            .iter()
            .map(|&i| self.network.unknown_owner(i))
            .collect();
        for &i in unknowns {
            if let UnknownKind::Node(n) = self.network.unknowns[i].1 {
                for part in &self.network.circuit.parts {
                    if part.pins.contains(&n) {
                        let name = format!("part `{}`", part.name);
                        if !involved.contains(&name) {
                            involved.push(name);
                        }
                    }
                }
            }
        }
        involved
    }

    pub(super) fn failure(&self, failure: NewtonFailure, ctx: &SolveContext) -> SimError {
        match failure {
            NewtonFailure::Singular(unknown) => SimError::Singular {
                time_s: ctx.time,
                unknown: self.network.unknown_name(unknown).to_string(),
                owner: self.network.unknown_owner(unknown),
            },
            NewtonFailure::Diverged => {
                let mut worst: Vec<usize> = (1..self.network.dim()).collect();
                worst.sort_by(|&a, &b| self.ws.update[b].total_cmp(&self.ws.update[a]));
                worst.truncate(3);
                let unknowns = worst
                    .iter()
                    .map(|&i| self.network.unknown_name(i).to_string())
                    .collect();
                let involved = self.involved(&worst);
                SimError::NoConvergence {
                    time_s: ctx.time,
                    step_s: ctx.h,
                    unknowns,
                    involved,
                }
            }
        }
    }

    /// Solves one step of length `h` from `state` into `ws.x_sol`, starting from a linear
    /// extrapolation of the last two points.
    pub(super) fn solve_step(
        &mut self,
        state: &mut SimState,
        h: f64,
        method: Method,
        left_limit: bool,
    ) -> Result<(), NewtonFailure> {
        let mut ctx = self.context(state.time + h, h, method);
        ctx.left_limit = left_limit;
        let ws = &mut self.ws;
        if state.points_since_break >= 2 && self.network.nonlinear {
            let dt_past = state.time - state.past_t[0];
            let r = h / dt_past;
            let dim = state.x.len();
            for i in 0..dim {
                ws.x_sol[i] = state.x[i] + r * (state.x[i] - state.past_x[i]);
            }
        } else {
            ws.x_sol.copy_from_slice(&state.x);
        }
        self.newton_from_guess(state, &ctx, self.settings.max_newton_iterations)
    }
}
