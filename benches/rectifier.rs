//! Benchmarks of the transient engine. Run with `cargo bench`; figures go to
//! `docs/performance.md`.

use sagtrip::circuit_file::parse_circuit;
use sagtrip::engine::{Settings, Simulator, Start};

fn main() {
    divan::main();
}

fn load(name: &str) -> sagtrip::circuit::Circuit {
    let path = format!("{}/examples/{name}", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).unwrap();
    parse_circuit(&text, &path).unwrap()
}

/// Simulates one second of `circuit` from rest per iteration.
fn one_second(bencher: divan::Bencher, circuit: &sagtrip::circuit::Circuit) {
    bencher.bench_local(|| {
        let mut sim = Simulator::new(circuit, Settings::default());
        let mut state = sim.start(Start::Rest).unwrap();
        sim.advance(&mut state, 1.0, &mut ()).unwrap();
        divan::black_box(state.stats.accepted_steps)
    });
}

/// One simulated second of a 50 Hz bridge rectifier with capacitor and resistive load,
/// started from rest.
#[divan::bench(sample_count = 10)]
fn bridge_rectifier_one_second(bencher: divan::Bencher) {
    one_second(bencher, &load("bridge-rectifier.toml"));
}

/// One simulated second of the transformer-fed supply (coupled windings, bridge, zener,
/// LED), started from rest.
#[divan::bench(sample_count = 10)]
fn transformer_supply_one_second(bencher: divan::Bencher) {
    one_second(bencher, &load("transformer-supply.toml"));
}

/// One simulated second of the reference guard powering up from rest (relay picks up at
/// about 0.71 s).
#[divan::bench(sample_count = 10)]
fn reference_guard_one_second(bencher: divan::Bencher) {
    one_second(
        bencher,
        &parse_circuit(sagtrip::builtin::REFERENCE_GUARD, "guard").unwrap(),
    );
}

/// A small trip map of the reference guard from one shared power-up: 4 levels x 4
/// durations x 2 phases (32 events with their reconnections), on all cores.
#[divan::bench(sample_count = 3)]
fn reference_guard_small_map(bencher: divan::Bencher) {
    use sagtrip::scenario::{settle, EventOptions};
    use sagtrip::sweep::{log_durations, run_grid, Grid};
    let circuit = parse_circuit(sagtrip::builtin::REFERENCE_GUARD, "guard").unwrap();
    let settled = settle(&circuit, &EventOptions::default()).unwrap();
    let grid = Grid {
        levels_pct: vec![0.0, 40.0, 80.0, 90.0],
        durations_s: log_durations(0.01, 1.0, 4),
        phases_deg: vec![0.0, 90.0],
    };
    bencher.bench_local(|| {
        let points = run_grid(
            &settled,
            &circuit,
            &grid,
            sagtrip::profile::DEFAULT_EDGE_S,
            &|| {},
        );
        divan::black_box(points.len())
    });
}

/// One event run of a guard: power-up from rest until settled, `interrupt:10cyc`, then the
/// reconnection delay until settled again; with or without the multi-rate shortcuts.
fn one_event(bencher: divan::Bencher, circuit: &sagtrip::circuit::Circuit, skip_steady: bool) {
    use sagtrip::scenario::{run_event, EventOptions};
    let profile =
        sagtrip::profile::parse_spec("interrupt:10cyc", sagtrip::profile::DEFAULT_EDGE_S).unwrap();
    let options = EventOptions {
        skip_steady,
        ..EventOptions::default()
    };
    bencher.bench_local(|| {
        let run = run_event(circuit, &profile, &options).unwrap();
        divan::black_box(run.stats.accepted_steps)
    });
}

/// The reference guard's one-event run (2.34 s of power-up, the event, 0.72 s of delay).
#[divan::bench(sample_count = 10)]
fn reference_guard_interrupt(bencher: divan::Bencher) {
    let guard = parse_circuit(sagtrip::builtin::REFERENCE_GUARD, "guard").unwrap();
    one_event(bencher, &guard, true);
}

/// The same with every cycle stepped in full (`--full-steps`).
#[divan::bench(sample_count = 10)]
fn reference_guard_interrupt_full_steps(bencher: divan::Bencher) {
    let guard = parse_circuit(sagtrip::builtin::REFERENCE_GUARD, "guard").unwrap();
    one_event(bencher, &guard, false);
}

/// The compressor guard's one-event run: about 196 s of power-up delay and 196 s of
/// reconnection delay, followed by envelope steps.
#[divan::bench(sample_count = 3)]
fn compressor_guard_interrupt(bencher: divan::Bencher) {
    one_event(bencher, &load("guard-230v-compressor.toml"), true);
}
