//! Test helpers: the one place the tests call the simulation API.
#![allow(dead_code)]

use sagtrip::circuit::Circuit;
use sagtrip::circuit_file::{parse_circuit, CircuitFileError};
use sagtrip::engine::{Settings, Simulator, Start};
use sagtrip::probe::{Probe, Trace};

/// Parses a circuit written in the test, panicking with the rendered problems if invalid.
pub fn circuit(text: &str) -> Circuit {
    parse_circuit(text, "test.toml").unwrap_or_else(|e| panic!("{e}"))
}

/// Parses a circuit that must be rejected, returning its problems.
pub fn rejected(text: &str) -> CircuitFileError {
    match parse_circuit(text, "bad.toml") {
        Ok(_) => panic!("the circuit was accepted but should have been rejected"),
        Err(e) => e,
    }
}

/// A run's result: the trace of the named probes.
pub struct Run {
    pub circuit: Circuit,
    pub trace: Trace,
    pub stats: sagtrip::engine::RunStats,
}

impl Run {
    /// The column of a probe name (`NODE` or `current:PART`).
    pub fn column(&self, name: &str) -> &[f64] {
        let probe = Probe::parse(name, &self.circuit).unwrap();
        self.trace.column(&probe).unwrap()
    }

    /// Linear interpolation of a probe at time `t`.
    pub fn at(&self, name: &str, t: f64) -> f64 {
        let column = self.column(name);
        let times = &self.trace.time;
        let k = times.partition_point(|&x| x < t);
        if k == 0 {
            return column[0];
        }
        if k >= times.len() {
            return *column.last().unwrap();
        }
        let (t0, t1) = (times[k - 1], times[k]);
        let w = if t1 > t0 { (t - t0) / (t1 - t0) } else { 1.0 };
        column[k - 1] * (1.0 - w) + column[k] * w
    }
}

/// Simulates `text` from `start` to `t_end` with `settings`, recording `probes`.
pub fn simulate(text: &str, start: Start, t_end: f64, settings: Settings, probes: &[&str]) -> Run {
    let circuit = circuit(text);
    let probes = probes
        .iter()
        .map(|p| Probe::parse(p, &circuit).unwrap())
        .collect();
    let mut sim = Simulator::new(&circuit, settings);
    let mut state = sim.start(start).unwrap_or_else(|e| panic!("{e}"));
    let mut trace = Trace::new(probes);
    trace.record(sim.network(), &state);
    sim.advance(&mut state, t_end, &mut trace)
        .unwrap_or_else(|e| panic!("{e}"));
    Run {
        circuit,
        trace,
        stats: state.stats,
    }
}

/// Default settings.
pub fn settings() -> Settings {
    Settings::default()
}

/// The built-in reference guard, parsed once per test binary.
pub fn guard() -> &'static Circuit {
    static GUARD: std::sync::OnceLock<Circuit> = std::sync::OnceLock::new();
    GUARD.get_or_init(|| circuit(sagtrip::builtin::REFERENCE_GUARD))
}

/// The reference guard powered up with the default options, once per test binary: the one
/// helper through which tests settle it (each event runs on a copy).
pub fn settled_guard() -> &'static sagtrip::scenario::Settled {
    static SETTLED: std::sync::OnceLock<sagtrip::scenario::Settled> = std::sync::OnceLock::new();
    SETTLED.get_or_init(|| {
        sagtrip::scenario::settle(guard(), &sagtrip::scenario::EventOptions::default())
            .expect("the reference guard powers up")
    })
}

/// The reference guard's static thresholds with the default search, once per test binary.
pub fn guard_thresholds() -> &'static sagtrip::thresholds::StaticThresholds {
    static THRESHOLDS: std::sync::OnceLock<sagtrip::thresholds::StaticThresholds> =
        std::sync::OnceLock::new();
    THRESHOLDS.get_or_init(|| {
        sagtrip::thresholds::find(
            settled_guard(),
            guard(),
            &sagtrip::thresholds::ThresholdOptions::default(),
        )
        .expect("the reference guard's thresholds")
    })
}
