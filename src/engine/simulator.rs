//! The simulator: compiling a circuit, starting it, and what a caller may change between runs.

use super::*;

impl Simulator {
    /// Compiles `circuit` for simulation with `settings`.
    ///
    /// ```
    /// use sagtrip::engine::{Settings, Simulator, Start};
    /// let text = "[part.v]\nkind = \"voltage-source\"\npins = [\"a\", \"gnd\"]\ndc = 10\n\
    ///             [part.r1]\nkind = \"resistor\"\npins = [\"a\", \"b\"]\nresistance = \"1k\"\n\
    ///             [part.r2]\nkind = \"resistor\"\npins = [\"b\", \"gnd\"]\nresistance = \"3k\"\n";
    /// let circuit = sagtrip::circuit_file::parse_circuit(text, "divider.toml").unwrap();
    /// let mut sim = Simulator::new(&circuit, Settings::default());
    /// let mut state = sim.start(Start::OperatingPoint).unwrap();
    /// sim.advance(&mut state, 1e-3, &mut ()).unwrap();
    /// let b = circuit.node("b").unwrap();
    /// // 7.5 V less the microvolt-scale load of the 1e-12 S node shunts.
    /// assert!((state.node_voltage(b) - 7.5).abs() < 1e-6);
    /// ```
    pub fn new(circuit: &Circuit, settings: Settings) -> Self {
        let network = Network::new(circuit);
        let dim = network.dim();
        let pattern = structure(&network);
        let ws = Workspace {
            a: vec![0.0; dim * dim],
            b: vec![0.0; dim],
            lu: SparseLu::new(dim, &pattern),
            work: vec![0.0; dim],
            x_sol: vec![0.0; dim],
            x_next: vec![0.0; dim],
            x_keep: vec![0.0; dim],
            x_line: vec![0.0; dim],
            scratch: vec![0.0; network.scratch_len],
            update: vec![0.0; dim],
            a_copy: vec![0.0; dim * dim],
        };
        Self {
            network,
            settings,
            ws,
        }
    }

    /// The compiled network.
    pub fn network(&self) -> &Network {
        &self.network
    }

    /// The settings in force.
    pub fn settings(&self) -> &Settings {
        &self.settings
    }

    /// Changes the largest step (for example to follow a recording's sample spacing).
    pub fn set_max_step(&mut self, max_step_s: f64) {
        self.settings.max_step_s = max_step_s;
    }

    pub(super) fn empty_state(&self) -> SimState {
        let dim = self.network.dim();
        SimState {
            time: 0.0,
            x: vec![0.0; dim],
            hist: vec![0.0; self.network.history_len],
            modes: self
                .network
                .devices
                .iter()
                .map(super::super::devices::Device::initial_mode)
                .collect(),
            pending: Vec::with_capacity(PENDING_CAPACITY),
            past_x: vec![0.0; 2 * dim],
            past_t: [0.0; 2],
            points_since_break: 1,
            step: self.settings.restart_step_s,
            just_rejected: false,
            corner_ahead: false,
            stats: RunStats::default(),
        }
    }

    /// The state at t = 0, either the operating point or at rest.
    pub fn start(&mut self, start: Start) -> Result<SimState, SimError> {
        let mut state = self.empty_state();
        match start {
            Start::OperatingPoint => {
                self.operating_point(&mut state)?;
                for d in &self.network.devices {
                    d.steady_history(&state.x, &mut state.hist);
                }
            }
            Start::Rest => {
                for d in &self.network.devices {
                    d.rest_history(&mut state.hist);
                }
                // A very short backward-Euler step pins capacitor voltages and inductor
                // currents at their initial values and finds every other unknown.
                let ctx = self.context(0.0, 1e-9, Method::BackwardEuler);
                self.newton(
                    &mut state,
                    &ctx,
                    self.settings.max_operating_point_iterations,
                    false,
                )
                .map_err(|f| self.failure(f, &ctx))?;
                state.x.copy_from_slice(&self.ws.x_sol);
            }
        }
        Ok(state)
    }

    pub(super) fn context(&self, time: f64, h: f64, method: Method) -> SolveContext {
        SolveContext {
            time,
            h,
            method,
            source_scale: 1.0,
            gmin: self.settings.gmin,
            shunt: self.settings.gmin,
            left_limit: false,
        }
    }

    /// Finds the operating point: plain Newton, then gmin stepping, then source stepping.
    pub(super) fn operating_point(&mut self, state: &mut SimState) -> Result<(), SimError> {
        let iterations = self.settings.max_operating_point_iterations;
        let mut ctx = self.context(state.time, 0.0, Method::OperatingPoint);
        state.x.iter_mut().for_each(|v| *v = 0.0);
        if self.newton(state, &ctx, iterations, false).is_ok() {
            state.x.copy_from_slice(&self.ws.x_sol);
            return Ok(());
        }
        // gmin stepping: a large shunt on every node, reduced a decade at a time.
        let mut gmin_ok = true;
        state.x.iter_mut().for_each(|v| *v = 0.0);
        for exponent in 2..=12 {
            state.stats.stepping_solves += 1;
            ctx.shunt = 10f64.powi(-exponent).max(self.settings.gmin);
            if self.newton(state, &ctx, iterations, true).is_err() {
                gmin_ok = false;
                break;
            }
            state.x.copy_from_slice(&self.ws.x_sol);
        }
        if gmin_ok {
            ctx.shunt = self.settings.gmin;
            if self.newton(state, &ctx, iterations, true).is_ok() {
                state.x.copy_from_slice(&self.ws.x_sol);
                return Ok(());
            }
        }
        // Source stepping: ramp every source from 0 to its value.
        ctx.shunt = self.settings.gmin;
        state.x.iter_mut().for_each(|v| *v = 0.0);
        let mut scale: f64 = 0.0;
        let mut increment: f64 = 0.1;
        while scale < 1.0 {
            let target = (scale + increment).min(1.0);
            ctx.source_scale = target;
            state.stats.stepping_solves += 1;
            match self.newton(state, &ctx, iterations, true) {
                Ok(()) => {
                    state.x.copy_from_slice(&self.ws.x_sol);
                    scale = target;
                    increment *= 1.5;
                }
                Err(f) => {
                    increment /= 4.0;
                    if increment < 1e-6 {
                        return Err(SimError::OperatingPoint(Box::new(self.failure(f, &ctx))));
                    }
                }
            }
        }
        Ok(())
    }

    /// Current into the first pin of part `part` at the state, amperes.
    pub fn part_current(&self, state: &SimState, part: usize) -> f64 {
        self.network.part_current(state, part)
    }

    /// Replaces the waveform of source part `part` (a voltage or current source). The
    /// state is unaffected: a run continues with the new waveform from its present time, so
    /// a waveform that agrees with the old one up to then joins without a step.
    pub fn set_source_waveform(&mut self, part: usize, waveform: Waveform) -> Result<(), SimError> {
        let mut found = false;
        for &(d, _) in &self.network.part_devices[part] {
            if let Device::VoltageSource { waveform: w, .. }
            | Device::CurrentSource { waveform: w, .. } = &mut self.network.devices[d]
            {
                *w = waveform.clone();
                found = true;
            }
        }
        if found {
            Ok(())
        } else {
            Err(SimError::NotASource(
                self.network.circuit.parts[part].name.clone(),
            ))
        }
    }
}
