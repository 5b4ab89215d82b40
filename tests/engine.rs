//! Engine behaviour: located discrete events, snapshots, allocation-free stepping,
//! clear failures, and the linear solver against nalgebra's LU.

mod common;

use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;

use common::{circuit, settings, simulate};
use sagtrip::engine::{DenseLu, EventKind, Settings, SimError, Simulator, Start};

/// Counts allocations per thread so a test can prove the stepping loop makes none (tests
/// run on parallel threads of one process).
struct CountingAllocator;

thread_local! {
    static ALLOCATIONS: Cell<usize> = const { Cell::new(0) };
}

fn allocations() -> usize {
    ALLOCATIONS.with(Cell::get)
}

unsafe impl GlobalAlloc for CountingAllocator {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        let _ = ALLOCATIONS.try_with(|c| c.set(c.get() + 1));
        unsafe { System.alloc(layout) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        unsafe { System.dealloc(ptr, layout) }
    }
}

#[global_allocator]
static GLOBAL: CountingAllocator = CountingAllocator;

const SWITCHED: &str = r#"
[part.control]
kind = "voltage-source"
pins = ["ctl", "gnd"]
sine = { amplitude = "10V", frequency = "50Hz" }
[part.r_ctl]
kind = "resistor"
pins = ["ctl", "gnd"]
resistance = "10k"
[part.supply]
kind = "voltage-source"
pins = ["vcc", "gnd"]
dc = "12V"
[part.r_pull]
kind = "resistor"
pins = ["vcc", "out"]
resistance = "1k"
[part.s1]
kind = "switch"
pins = { a = "out", b = "gnd", control_plus = "ctl", control_minus = "gnd" }
on_voltage = "5V"
off_voltage = "2V"
on_resistance = "1"
off_resistance = "1M"
"#;

#[test]
fn switch_transitions_are_located_within_10_us() {
    let run = simulate(SWITCHED, Start::OperatingPoint, 30e-3, settings(), &["out"]);
    let events = &run.trace.events;
    assert!(events.len() >= 4, "{events:?}");
    // 10 sin(wt) rises through 5 V at asin(0.5)/w and falls through 2 V at (pi - asin 0.2)/w.
    let w = 2.0 * std::f64::consts::PI * 50.0;
    let close = 0.5_f64.asin() / w;
    let open = (std::f64::consts::PI - 0.2_f64.asin()) / w;
    assert_eq!(events[0].kind, EventKind::SwitchClosed);
    assert_eq!(events[1].kind, EventKind::SwitchOpened);
    assert!(
        (events[0].time - close).abs() < 10e-6,
        "{} vs {close}",
        events[0].time
    );
    assert!(
        (events[1].time - open).abs() < 10e-6,
        "{} vs {open}",
        events[1].time
    );
    assert!((events[2].time - close - 0.02).abs() < 10e-6);
    // While closed the output is pulled to 12 * 1/(1k + 1) V.
    let mid = run.at("out", 5e-3);
    assert!((mid - 12.0 / 1001.0).abs() < 1e-6, "{mid}");
}

#[test]
fn a_cloned_state_resumes_exactly() {
    let circuit = circuit(SWITCHED);
    let mut sim = Simulator::new(&circuit, settings());
    let mut state = sim.start(Start::OperatingPoint).unwrap();
    sim.advance(&mut state, 7e-3, &mut ()).unwrap();
    let snapshot = state.clone();
    sim.advance(&mut state, 40e-3, &mut ()).unwrap();
    // A second simulator (as a sweep worker would have) resumes the snapshot.
    let mut other = Simulator::new(&circuit, settings());
    let mut resumed = snapshot.clone();
    other.advance(&mut resumed, 40e-3, &mut ()).unwrap();
    assert_eq!(state.solution(), resumed.solution());
    assert_eq!(state.time, resumed.time);
}

#[test]
fn stepping_allocates_nothing() {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/examples/transformer-supply.toml"
    ))
    .unwrap();
    let circuit = circuit(&text);
    let mut sim = Simulator::new(&circuit, settings());
    let mut state = sim.start(Start::Rest).unwrap();
    sim.advance(&mut state, 5e-3, &mut ()).unwrap();
    let before = allocations();
    sim.advance(&mut state, 400e-3, &mut ()).unwrap();
    let after = allocations();
    assert!(
        state.stats.accepted_steps > 1000,
        "{}",
        state.stats.accepted_steps
    );
    assert_eq!(after - before, 0, "allocations during 395 ms of stepping");
}

#[test]
fn an_undetermined_node_is_named() {
    // 1 A forced into a reverse-biased diode with no breakdown: nothing can carry it.
    let text = r#"
[part.pump]
kind = "current-source"
pins = ["gnd", "k"]
dc = "1A"
[part.d1]
kind = "diode"
pins = { anode = "gnd", cathode = "k" }
"#;
    let circuit = circuit(text);
    let mut sim = Simulator::new(&circuit, settings());
    let error = sim.start(Start::OperatingPoint).unwrap_err();
    let message = error.to_string();
    assert!(
        message.contains("node `k`") || message.contains("part `d1`"),
        "{message}"
    );
    assert!(matches!(
        error,
        SimError::Singular { .. } | SimError::OperatingPoint(_)
    ));
}

#[test]
fn operating_point_of_a_diode_string_converges() {
    // Ten diodes in series from 230 V peak through 100 ohm: hard for plain Newton from zero.
    let text = diode_string();
    let run = simulate(
        &text,
        Start::OperatingPoint,
        1e-6,
        settings(),
        &["n1", "current:r1"],
    );
    let i = run.column("current:r1")[0];
    // KVL: 325 = 100 I + 10 Vt ln(I/Is + 1).
    let vt = sagtrip::circuit::THERMAL_VOLTAGE;
    let residual = 325.0 - 100.0 * i - 10.0 * vt * (i / 1e-15 + 1.0).ln();
    assert!(residual.abs() < 1e-3, "residual {residual} V at I = {i}");
}

#[test]
fn dense_lu_agrees_with_nalgebra() {
    // A deterministic, diagonally weak, nonsymmetric matrix that needs pivoting.
    let n = 12;
    let dim = n + 1;
    let mut a = vec![0.0; dim * dim];
    let mut seed: u64 = 12345;
    let mut next = || {
        seed = seed
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        ((seed >> 11) as f64 / (1u64 << 53) as f64) * 2.0 - 1.0
    };
    let mut reference = nalgebra::DMatrix::<f64>::zeros(n, n);
    for i in 1..dim {
        for j in 1..dim {
            let v = next() * if i == j { 0.01 } else { 1.0 };
            a[i * dim + j] = v;
            reference[(i - 1, j - 1)] = v;
        }
    }
    let b: Vec<f64> = (0..dim)
        .map(|i| if i == 0 { 0.0 } else { next() })
        .collect();
    let mut lu = DenseLu::new(dim);
    lu.factor(&mut a).unwrap();
    let mut x = b.clone();
    let mut work = vec![0.0; dim];
    lu.solve(&a, &mut x, &mut work);
    let rhs = nalgebra::DVector::from_iterator(n, b[1..].iter().copied());
    let expected = reference.lu().solve(&rhs).unwrap();
    for i in 0..n {
        assert!(
            (x[i + 1] - expected[i]).abs() < 1e-10 * (1.0 + expected[i].abs()),
            "{i}: {} vs {}",
            x[i + 1],
            expected[i]
        );
    }
}

#[test]
fn a_singular_matrix_is_reported() {
    let dim = 3;
    // Two identical rows.
    let mut a = vec![0.0, 0.0, 0.0, 0.0, 1.0, 2.0, 0.0, 2.0, 4.0];
    let mut lu = DenseLu::new(dim);
    assert!(lu.factor(&mut a).is_err());
}

#[test]
fn tighter_settings_are_honoured() {
    let s = Settings {
        max_step_s: 10e-6,
        ..Settings::default()
    };
    let run = simulate(SWITCHED, Start::OperatingPoint, 10e-3, s, &["out"]);
    let widest = run
        .trace
        .time
        .windows(2)
        .map(|w| w[1] - w[0])
        .fold(0.0, f64::max);
    assert!(widest <= 10e-6 * (1.0 + 1e-9), "{widest}");
}

/// A deterministic sparse, nonsymmetric matrix with some zero diagonals (as the branch rows
/// of voltage sources have), returned with its pattern.
fn sparse_system(n: usize, seed: u64, scale_row: usize) -> (Vec<f64>, Vec<bool>, Vec<f64>) {
    let dim = n + 1;
    let mut state = seed;
    let mut next = || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    let mut a = vec![0.0; dim * dim];
    for i in 1..dim {
        // A tridiagonal-ish core plus a few far couplings; every third diagonal is zero.
        for j in 1..dim {
            let near = (i as i64 - j as i64).abs() <= 1;
            let far = next() < 0.08;
            if (near || far) && !(i == j && i % 3 == 0) {
                a[i * dim + j] = next() * 2.0 - 1.0 + if i == j { 3.0 } else { 0.0 };
            }
        }
    }
    for j in 1..dim {
        a[scale_row * dim + j] *= 1e6;
    }
    let pattern = a.iter().map(|v| *v != 0.0).collect();
    let b = (0..dim)
        .map(|i| if i == 0 { 0.0 } else { next() - 0.5 })
        .collect();
    (a, pattern, b)
}

#[test]
fn sparse_lu_agrees_with_nalgebra_and_reuses_its_order() {
    for (n, seed) in [(8, 1), (20, 2), (35, 3)] {
        let dim = n + 1;
        let (a0, pattern, b) = sparse_system(n, seed, 2);
        let mut reference = nalgebra::DMatrix::<f64>::zeros(n, n);
        for i in 1..dim {
            for j in 1..dim {
                reference[(i - 1, j - 1)] = a0[i * dim + j];
            }
        }
        let rhs = nalgebra::DVector::from_iterator(n, b[1..].iter().copied());
        let expected = reference.clone().lu().solve(&rhs).unwrap();
        let mut lu = sagtrip::engine::SparseLu::new(dim, &pattern);
        let mut work = vec![0.0; dim];
        let check = |x: &[f64], expected: &nalgebra::DVector<f64>| {
            for i in 0..n {
                assert!(
                    (x[i + 1] - expected[i]).abs() < 1e-9 * (1.0 + expected[i].abs()),
                    "n={n} {i}: {} vs {}",
                    x[i + 1],
                    expected[i]
                );
            }
        };
        // First factorisation chooses the order.
        let mut a = a0.clone();
        assert!(lu.refactor(&mut a).is_err(), "no order yet");
        let mut a = a0.clone();
        lu.factor_choosing_order(&mut a).unwrap();
        let mut x = b.clone();
        lu.solve(&a, &mut x, &mut work);
        check(&x, &expected);
        // Same pattern, new values: the kept order is reused.
        let mut a1 = a0.clone();
        for v in &mut a1 {
            *v *= 1.5;
        }
        let mut x = b.clone();
        lu.refactor(&mut a1).unwrap();
        lu.solve(&a1, &mut x, &mut work);
        let expected1 = (reference * 1.5).lu().solve(&rhs).unwrap();
        check(&x, &expected1);
        assert!(lu.fill() < dim * dim, "sparse: {} entries", lu.fill());
    }
}

#[test]
fn gmin_and_source_stepping_rescue_a_hard_operating_point() {
    // With Newton capped at 4 iterations, plain Newton from zero cannot reach the operating
    // point of a diode string fed from 325 V; the stepping fallbacks must.
    let text = diode_string();
    let circuit = circuit(&text);
    let capped = Settings {
        max_operating_point_iterations: 4,
        ..Settings::default()
    };
    let mut sim = Simulator::new(&circuit, capped);
    let state = sim.start(Start::OperatingPoint).unwrap();
    assert!(state.stats.stepping_solves > 0, "plain Newton was enough");
    let i = (state.node_voltage(1) - state.node_voltage(2)) / 100.0;
    // KVL: 325 = 100 I + 10 Vt ln(I/Is + 1).
    let vt = sagtrip::circuit::THERMAL_VOLTAGE;
    let residual = 325.0 - 100.0 * i - 10.0 * vt * (i / 1e-15 + 1.0).ln();
    assert!(residual.abs() < 1e-2, "residual {residual} V");
}

/// Ten 1 fA diodes in series fed from 325 V through 100 ohm.
fn diode_string() -> String {
    let mut text = String::from(
        "[part.supply]\nkind = \"voltage-source\"\npins = [\"n0\", \"gnd\"]\ndc = 325\n\
         [part.r1]\nkind = \"resistor\"\npins = [\"n0\", \"n1\"]\nresistance = 100\n",
    );
    for k in 1..=10 {
        let next = if k == 10 {
            "gnd".to_string()
        } else {
            format!("n{}", k + 1)
        };
        text += &format!(
            "[part.d{k}]\nkind = \"diode\"\npins = [\"n{k}\", \"{next}\"]\nsaturation_current = \"1f\"\n"
        );
    }
    text
}

#[test]
fn a_sliver_before_a_breakpoint_is_crossed_without_a_solve() {
    // Callers stop at times built by repeated addition (one mains cycle at a time), which
    // can fall a few ulps before a breakpoint of the source. Over such a sliver the
    // companion conductances 2C/h are so large that their rounding swamps every current
    // tolerance; the engine crosses it without a solve and restarts at the breakpoint,
    // and the run agrees with one that never stopped there.
    let circuit = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let mains = circuit.part("mains").unwrap();
    let envelope = sagtrip::profile::resolve("dip:40%:10cyc", 50.0, 5e-6)
        .unwrap()
        .envelope(50.0);
    let waveform = sagtrip::waveform::Waveform::Disturbed {
        amplitude: 230.0 * 2f64.sqrt(),
        frequency_hz: 50.0,
        phase_deg: 0.0,
        onset_s: 0.41,
        envelope,
    };
    let breakpoint = waveform.next_breakpoint(0.2);
    assert!(breakpoint > 0.4 && breakpoint < 0.42, "{breakpoint}");
    let mut sim = Simulator::new(&circuit, settings());
    sim.set_source_waveform(mains, waveform).unwrap();
    let mut state = sim.start(Start::OperatingPoint).unwrap();
    sim.advance(&mut state, 0.3, &mut ()).unwrap();
    let mut straight = state.clone();
    let mut stopped = state;
    sim.advance(&mut stopped, breakpoint - 1.78e-13, &mut ())
        .unwrap();
    let (iterations, restarts) = (stopped.stats.newton_iterations, stopped.stats.restarts);
    sim.advance(&mut stopped, breakpoint, &mut ()).unwrap();
    assert_eq!(stopped.time, breakpoint);
    assert_eq!(stopped.stats.newton_iterations, iterations);
    assert_eq!(stopped.stats.restarts, restarts + 1);
    sim.advance(&mut stopped, 0.6, &mut ()).unwrap();
    sim.advance(&mut straight, 0.6, &mut ()).unwrap();
    let vcc = circuit.node("vcc").unwrap();
    let (a, b) = (stopped.node_voltage(vcc), straight.node_voltage(vcc));
    // Both runs solve the same equations to the same tolerances (reltol 1e-4 per step);
    // 0.1% of the 12 V rail bounds their accumulated difference (common practice).
    assert!((a - b).abs() < 1e-3 * b.abs(), "{a} vs {b}");
}

#[test]
fn steps_down_to_the_smallest_allowed_converge() {
    // Over a 1 ps step (the default smallest step) the reference guard's reservoir
    // capacitor has a companion conductance 2C/h near 1e9 S: its node equation is known
    // only to a few ulps of 1e10 A, coarser than the current tolerance. Newton must accept
    // a residual at that rounding level instead of iterating until it gives up.
    let circuit = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let mut sim = Simulator::new(&circuit, settings());
    let mut state = sim.start(Start::OperatingPoint).unwrap();
    sim.advance(&mut state, 0.3, &mut ()).unwrap();
    let vcc = circuit.node("vcc").unwrap();
    let before = state.node_voltage(vcc);
    for h in [1e-12, 3e-12, 1e-11] {
        sim.set_max_step(h);
        let t = state.time;
        sim.advance(&mut state, t + 40.0 * h, &mut ()).unwrap();
    }
    let after = state.node_voltage(vcc);
    // 0.56 ns are simulated here. Capacitor law (dV = I dt / C, from memory): even the
    // whole 30 mA load drawn from the 10 uF rail capacitor alone would move it 1.7 uV; the
    // regulator holds it in steady state, so it must stay within the Newton voltage
    // tolerance, 1 uV.
    assert!((after - before).abs() < 1e-6, "{before} -> {after}");
}

#[test]
fn a_run_that_makes_no_progress_stops_and_names_what_moves() {
    // A bound no run can meet (an average step of a second over the watch window) stands in
    // for a circuit whose time constants are far shorter than its signals: the run must
    // stop with the stall error, in bounded time, naming an unknown and its parts.
    let c = circuit(
        "[part.v]\nkind = \"voltage-source\"\npins = [\"a\", \"gnd\"]\n\
         sine = { amplitude = \"10V\", frequency = \"50Hz\" }\n\
         [part.r]\nkind = \"resistor\"\npins = [\"a\", \"b\"]\nresistance = \"1k\"\n\
         [part.c]\nkind = \"capacitor\"\npins = [\"b\", \"gnd\"]\ncapacitance = \"1u\"\n",
    );
    let stalled = Settings {
        min_average_step_s: 1.0,
        max_step_s: 1e-6,
        ..settings()
    };
    let mut sim = Simulator::new(&c, stalled);
    let mut state = sim.start(Start::Rest).unwrap();
    let err = sim.advance(&mut state, 10.0, &mut ()).unwrap_err();
    let SimError::Stalled(stall) = &err else {
        panic!("{err}");
    };
    assert_eq!(stall.passes, sagtrip::engine::STALL_WINDOW);
    assert!(!stall.involved.is_empty(), "{err}");
    assert!(err.to_string().contains("stalled"), "{err}");
}
