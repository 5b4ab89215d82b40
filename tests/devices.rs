//! Protector device models against their closed forms and textbook circuits.

mod common;

use common::{circuit, settings, simulate};
use sagtrip::circuit::THERMAL_VOLTAGE;
use sagtrip::engine::{EventKind, Simulator, Start};
use sagtrip::probe::Trace;

/// Drain current of a transistor held at fixed terminal voltages.
fn mosfet_current(kind: &str, vgs: f64, vds: f64, lambda: f64) -> f64 {
    let text = format!(
        r#"
[part.gate_drive]
kind = "voltage-source"
pins = ["g", "gnd"]
dc = {vgs}
[part.drain_drive]
kind = "voltage-source"
pins = ["d", "gnd"]
dc = {vds}
[part.q1]
kind = "{kind}"
pins = {{ drain = "d", gate = "g", source = "gnd" }}
threshold_voltage = "2V"
transconductance = "0.5A/V2"
channel_length_modulation = {lambda}
"#
    );
    let run = simulate(
        &text,
        Start::OperatingPoint,
        1e-6,
        settings(),
        &["current:q1"],
    );
    run.column("current:q1")[0]
}

#[test]
fn mosfet_follows_the_square_law() {
    // Shichman-Hodges square law (Sedra and Smith, Microelectronic Circuits):
    // saturation Id = (K/2)(Vgs - Vth)^2 (1 + lambda Vds),
    // triode Id = K((Vgs - Vth) Vds - Vds^2 / 2)(1 + lambda Vds).
    let (k, vth, lambda) = (0.5, 2.0, 0.02);
    let saturation = |vgs: f64, vds: f64| 0.5 * k * (vgs - vth).powi(2) * (1.0 + lambda * vds);
    let triode =
        |vgs: f64, vds: f64| k * ((vgs - vth) * vds - 0.5 * vds * vds) * (1.0 + lambda * vds);
    for (vgs, vds, expected) in [
        (3.0, 5.0, saturation(3.0, 5.0)),
        (4.5, 10.0, saturation(4.5, 10.0)),
        (5.0, 0.5, triode(5.0, 0.5)),
        (3.5, 1.0, triode(3.5, 1.0)),
        (1.5, 5.0, 0.0),
    ] {
        let got = mosfet_current("nmos", vgs, vds, lambda);
        assert!(
            (got - expected).abs() <= 1e-6 * expected.abs() + 1e-9,
            "Vgs {vgs}, Vds {vds}: {got} vs {expected}"
        );
        // A P channel is the mirror image: all voltages and currents negated.
        let p = mosfet_current("pmos", -vgs, -vds, lambda);
        assert!(
            (p + expected).abs() <= 1e-6 * expected.abs() + 1e-9,
            "P: {p} vs {}",
            -expected
        );
    }
}

#[test]
fn mosfet_body_diode_conducts_in_reverse() {
    // Drain pulled 1 V below the source through 100 ohm: the body diode (1 pA, n = 1)
    // carries it, the channel stays off (gate at the source).
    let text = r#"
[part.drive]
kind = "voltage-source"
pins = ["n", "gnd"]
dc = -1
[part.r1]
kind = "resistor"
pins = ["n", "d"]
resistance = 100
[part.q1]
kind = "nmos"
pins = { drain = "d", gate = "gnd", source = "gnd" }
threshold_voltage = "2V"
transconductance = "0.5A/V2"
"#;
    let run = simulate(
        text,
        Start::OperatingPoint,
        1e-6,
        settings(),
        &["d", "current:r1"],
    );
    let (vd, i) = (run.column("d")[0], -run.column("current:r1")[0]);
    // Shockley: V = Vt ln(I / Is + 1) across the diode (source to drain).
    let expected = THERMAL_VOLTAGE * (i / 1e-12 + 1.0).ln();
    assert!((-vd - expected).abs() < 1e-4, "{vd} {expected}");
}

#[test]
fn bipolar_follows_ebers_moll_in_the_active_region() {
    // Ebers and Moll (Proc. IRE 42, 1954), transport form: with Vbc << 0,
    // Ic = Is exp(Vbe/Vt) and Ib = Ic / beta_F.
    let text = r#"
[part.base_drive]
kind = "voltage-source"
pins = ["b", "gnd"]
dc = 0.65
[part.collector_drive]
kind = "voltage-source"
pins = ["c", "gnd"]
dc = 5
[part.q1]
kind = "npn"
pins = { collector = "c", base = "b", emitter = "gnd" }
saturation_current = "1e-14"
forward_beta = 150
"#;
    let run = simulate(
        text,
        Start::OperatingPoint,
        1e-6,
        settings(),
        &["current:q1", "current:base_drive"],
    );
    let ic = run.column("current:q1")[0];
    let ib = -run.column("current:base_drive")[0];
    let vt = THERMAL_VOLTAGE;
    let expected_ic = 1e-14 * ((0.65 / vt).exp() - (-4.35 / vt).exp()) + 1e-14 * 1.0;
    assert!(
        (ic / expected_ic - 1.0).abs() < 1e-6,
        "{ic} vs {expected_ic}"
    );
    let expected_ib = 1e-14 / 150.0 * ((0.65 / vt).exp() - 1.0) - 1e-14;
    assert!(
        (ib / expected_ib - 1.0).abs() < 1e-4,
        "{ib} vs {expected_ib}"
    );
}

const RELAY: &str = r#"
[part.supply]
kind = "voltage-source"
pins = ["v", "gnd"]
step = { before = "12V", after = "0V", at = "20ms" }
[part.k1]
kind = "relay"
pins = { coil_a = "v", coil_b = "gnd", common = "com", normally_open = "no", normally_closed = "nc" }
coil_resistance = "400"
coil_inductance = "0.25H"
pickup_current = "22.5mA"
dropout_current = "4mA"
close_travel = "6ms"
open_travel = "3ms"
bounce_count = 3
bounce_time = "1.5ms"
[part.feed]
kind = "voltage-source"
pins = ["com", "gnd"]
dc = "10V"
[part.load_no]
kind = "resistor"
pins = ["no", "gnd"]
resistance = "100"
[part.load_nc]
kind = "resistor"
pins = ["nc", "gnd"]
resistance = "100"
"#;

#[test]
fn relay_picks_up_on_the_rl_exponential_and_bounces() {
    let mut run_settings = settings();
    run_settings.max_step_s = 100e-6;
    let circuit = circuit(RELAY);
    let mut sim = Simulator::new(&circuit, run_settings);
    let mut state = sim.start(Start::Rest).unwrap();
    let coil = sagtrip::probe::Probe::parse("current:k1", &circuit).unwrap();
    let no = sagtrip::probe::Probe::parse("no", &circuit).unwrap();
    let mut trace = Trace::new(vec![coil.clone(), no.clone()]);
    sim.advance(&mut state, 40e-3, &mut trace).unwrap();

    // RL: i = (V/R)(1 - exp(-t R/L)) (Hayt, Kemmerly and Durbin), tau = 0.625 ms.
    let tau = 0.25 / 400.0;
    for (t, i) in trace.time.iter().zip(trace.column(&coil).unwrap()) {
        if *t < 20e-3 {
            let expected = 0.03 * (1.0 - (-t / tau).exp());
            assert!(
                (i - expected).abs() < 0.03 * 2e-3,
                "t={t}: {i} vs {expected}"
            );
        }
    }
    let events = &trace.events;
    let pickup = events
        .iter()
        .find(|e| e.kind == EventKind::PickUp)
        .unwrap()
        .time;
    // Pick-up at 75% of the final current: t = (L/R) ln 4 = 1.386294 L/R (derived,
    // derived from the RL exponential), located within 10 us.
    assert!((pickup - 1.386_294 * tau).abs() < 10e-6, "{pickup}");
    // Contacts move after the close travel: NC breaks and NO makes at pick-up + 6 ms, then
    // three bounces within 1.5 ms, the last make at pick-up + 7.5 ms.
    let made: Vec<f64> = events
        .iter()
        .filter(|e| e.kind == EventKind::NormallyOpenMade)
        .map(|e| e.time)
        .collect();
    let broken: Vec<f64> = events
        .iter()
        .filter(|e| e.kind == EventKind::NormallyOpenBroken)
        .map(|e| e.time)
        .collect();
    assert!((made[0] - pickup - 6e-3).abs() < 1e-9);
    assert_eq!(made.len(), 4, "{events:?}");
    assert!((made[3] - pickup - 7.5e-3).abs() < 1e-9);
    assert!((broken[0] - pickup - 6.25e-3).abs() < 1e-9);
    let nc_break = events
        .iter()
        .find(|e| e.kind == EventKind::NormallyClosedBroken)
        .unwrap();
    assert!((nc_break.time - pickup - 6e-3).abs() < 1e-9);

    // Drop-out: the supply steps to 0 at 20 ms; the coil current decays through the source,
    // i = I0 exp(-t R/L), and falls through 4 mA at 20 ms + (L/R) ln(30/4).
    let dropout = events
        .iter()
        .find(|e| e.kind == EventKind::DropOut)
        .unwrap()
        .time;
    let expected = 20e-3 + tau * (30.0_f64 / 4.0).ln();
    assert!(
        (dropout - expected).abs() < 10e-6,
        "{dropout} vs {expected}"
    );
    // NO breaks after the open travel; NC makes then bounces.
    let final_break = events
        .iter()
        .rfind(|e| e.kind == EventKind::NormallyOpenBroken)
        .unwrap();
    assert!((final_break.time - dropout - 3e-3).abs() < 1e-9);
    // While the NO contact is closed the load sees the 10 V feed.
    let k = trace.time.partition_point(|t| *t < 12e-3);
    assert!((trace.column(&no).unwrap()[k] - 10.0 * 100.0 / 100.05).abs() < 1e-3);
}

#[test]
fn astable_timer_matches_the_classic_formulas() {
    // Classic astable: Ra = 1 kohm, Rb = 10 kohm, C = 10 nF:
    // f = 1 / (ln2 (Ra + 2 Rb) C) = 6869.98 Hz, ~ 1.44 / ((Ra + 2 Rb) C),
    // duty = (Ra + Rb) / (Ra + 2 Rb) = 0.5238 (timer data sheets; derived).
    let text = r#"
[part.supply]
kind = "voltage-source"
pins = ["vcc", "gnd"]
dc = "9V"
[part.u1]
kind = "timer"
pins = { supply_plus = "vcc", supply_minus = "gnd", trigger = "c", threshold = "c", reset = "vcc", output = "out", discharge = "dis" }
discharge_resistance = "1"
[part.ra]
kind = "resistor"
pins = ["vcc", "dis"]
resistance = "1k"
[part.rb]
kind = "resistor"
pins = ["dis", "c"]
resistance = "10k"
[part.ct]
kind = "capacitor"
pins = ["c", "gnd"]
capacitance = "10n"
[part.load]
kind = "resistor"
pins = ["out", "gnd"]
resistance = "10k"
"#;
    let mut s = settings();
    s.max_step_s = 10e-6;
    let run = simulate(text, Start::OperatingPoint, 3e-3, s, &["out"]);
    let sets: Vec<f64> = run
        .trace
        .events
        .iter()
        .filter(|e| e.kind == EventKind::TimerSet)
        .map(|e| e.time)
        .collect();
    let resets: Vec<f64> = run
        .trace
        .events
        .iter()
        .filter(|e| e.kind == EventKind::TimerReset)
        .map(|e| e.time)
        .collect();
    assert!(sets.len() > 10, "{sets:?}");
    // Skip the first cycle (the capacitor starts from 0 V, not from Vcc/3).
    let n = sets.len() - 2;
    let period = (sets[n + 1] - sets[1]) / n as f64;
    let f = 1.0 / period;
    assert!((f / 6869.98 - 1.0).abs() < 0.03, "f = {f} Hz");
    let high: f64 = (1..=n)
        .map(|k| {
            let r = resets.iter().find(|&&r| r > sets[k]).unwrap();
            r - sets[k]
        })
        .sum::<f64>()
        / n as f64;
    let duty = high / period;
    assert!((duty / (11.0 / 21.0) - 1.0).abs() < 0.03, "duty {duty}");
    // And the simpler 1.44 / ((Ra + 2 Rb) C) rounding of the same formula.
    assert!((f / (1.44 / (21e3 * 10e-9)) - 1.0).abs() < 0.03);
}

/// The input voltage at each output transition of a comparator driven by a slow sine.
fn switching_levels(text: &str) -> (Vec<f64>, Vec<f64>) {
    switching_levels_over(text, 0.2, 5.0)
}

/// As [`switching_levels`], over `t_end` seconds, with the output's middle at `mid` volts.
fn switching_levels_over(text: &str, t_end: f64, mid: f64) -> (Vec<f64>, Vec<f64>) {
    let mut s = settings();
    s.max_step_s = 100e-6;
    let run = simulate(text, Start::Rest, t_end, s, &["in", "out"]);
    let (times, vin, out) = (&run.trace.time, run.column("in"), run.column("out"));
    let (mut rising_out, mut falling_out) = (Vec::new(), Vec::new());
    for k in 1..times.len() {
        if times[k] < 0.01 {
            continue;
        }
        if out[k - 1] < mid && out[k] >= mid {
            rising_out.push(vin[k]);
        } else if out[k - 1] >= mid && out[k] < mid {
            falling_out.push(vin[k]);
        }
    }
    (rising_out, falling_out)
}

/// A 12 V supply, a 5 V reference and a 10 Hz sine from 2 V to 8 V on `in`: the bench the
/// comparator tests add their circuit to.
const COMPARATOR_BENCH: &str = r#"
[part.supply]
kind = "voltage-source"
pins = ["vcc", "gnd"]
dc = "12V"
[part.reference]
kind = "voltage-source"
pins = ["ref", "gnd"]
dc = "5V"
[part.signal]
kind = "voltage-source"
pins = ["in", "gnd"]
sine = { amplitude = "3V", offset = "5V", frequency = "10Hz" }
"#;

#[test]
fn comparator_with_positive_feedback_switches_at_the_resistor_ratio_thresholds() {
    // Inverting Schmitt trigger: the input drives the minus pin; the plus pin is the
    // divider between a 5 V reference (R1 = 10 kohm) and the output (R2 = 100 kohm plus the
    // 100 ohm output resistance). Thresholds (Sedra and Smith, Microelectronic Circuits):
    // V = (Vref R2 + Vout R1) / (R1 + R2), with Vout = 10.5 V (12 V - 1.5 V) or 0.05 V.
    let text = &format!(
        "{COMPARATOR_BENCH}{}",
        r#"[part.r_in]
kind = "resistor"
pins = ["in", "gnd"]
resistance = "10k"
[part.r1]
kind = "resistor"
pins = ["ref", "plus"]
resistance = "10k"
[part.r2]
kind = "resistor"
pins = ["out", "plus"]
resistance = "100k"
[part.u1]
kind = "comparator"
pins = { plus = "plus", minus = "in", output = "out", supply_plus = "vcc", supply_minus = "gnd" }
"#
    );
    let (r1, r2) = (10e3, 100e3 + 100.0);
    let upper = (5.0 * r2 + 10.5 * r1) / (r1 + r2);
    let lower = (5.0 * r2 + 0.05 * r1) / (r1 + r2);
    let (rising_out, falling_out) = switching_levels(text);
    assert!(!rising_out.is_empty() && !falling_out.is_empty());
    // Output falls when the input rises through the upper threshold, and vice versa.
    for v in &falling_out {
        assert!((v - upper).abs() < 0.01, "upper: {v} vs {upper}");
    }
    for v in &rising_out {
        assert!((v - lower).abs() < 0.01, "lower: {v} vs {lower}");
    }
    // The hysteresis band: (Vhigh - Vlow) R1 / (R1 + R2).
    let band = falling_out[0] - rising_out[0];
    assert!((band - 10.45 * r1 / (r1 + r2)).abs() < 0.02, "{band}");
}

#[test]
fn comparator_built_in_hysteresis_is_centred_on_the_offset() {
    // Non-inverting: input on plus, 5 V on minus, 0.4 V built-in band, 0.1 V offset: the
    // output rises at 5.3 V and falls at 4.9 V (model definition, docs/models.md).
    let text = &format!(
        "{COMPARATOR_BENCH}{}",
        r#"[part.r_load]
kind = "resistor"
pins = ["out", "gnd"]
resistance = "100k"
[part.u1]
kind = "comparator"
pins = { plus = "in", minus = "ref", output = "out", supply_plus = "vcc", supply_minus = "gnd" }
hysteresis = "0.4V"
input_offset = "0.1V"
"#
    );
    let (rising_out, falling_out) = switching_levels(text);
    for v in &rising_out {
        assert!((v - 5.3).abs() < 0.01, "rise at {v}");
    }
    for v in &falling_out {
        assert!((v - 4.9).abs() < 0.01, "fall at {v}");
    }
}

#[test]
fn comparator_built_in_hysteresis_is_exact_at_a_low_supply() {
    // On a 5 V supply (output span 3.45 V) a 1 V band around a 2.5 V reference: the output
    // rises at 3.0 V and falls at 2.0 V exactly, as on 12 V (model definition,
    // docs/models.md: offset +/- hysteresis / 2 at any supply). The 1 Hz input moves under
    // 0.7 mV per 100 us step.
    let text = r#"
[part.supply]
kind = "voltage-source"
pins = ["vcc", "gnd"]
dc = "5V"
[part.reference]
kind = "voltage-source"
pins = ["ref", "gnd"]
dc = "2.5V"
[part.signal]
kind = "voltage-source"
pins = ["in", "gnd"]
sine = { amplitude = "1.2V", offset = "2.5V", frequency = "1Hz" }
[part.r_load]
kind = "resistor"
pins = ["out", "gnd"]
resistance = "100k"
[part.u1]
kind = "comparator"
pins = { plus = "in", minus = "ref", output = "out", supply_plus = "vcc", supply_minus = "gnd" }
hysteresis = "1V"
"#;
    let (rising_out, falling_out) = switching_levels_over(text, 2.0, 1.75);
    assert!(!rising_out.is_empty() && !falling_out.is_empty());
    for v in &rising_out {
        assert!((v - 3.0).abs() < 0.002, "rise at {v}");
    }
    for v in &falling_out {
        assert!((v - 2.0).abs() < 0.002, "fall at {v}");
    }
}

fn regulator(vin: f64) -> (f64, f64, f64) {
    let text = format!(
        r#"
[part.supply]
kind = "voltage-source"
pins = ["in", "gnd"]
dc = {vin}
[part.u1]
kind = "regulator"
pins = {{ input = "in", output = "out", common = "gnd" }}
output_voltage = "12V"
dropout_voltage = "2V"
quiescent_current = "5mA"
[part.load]
kind = "resistor"
pins = ["out", "gnd"]
resistance = "200"
"#
    );
    let run = simulate(
        &text,
        Start::OperatingPoint,
        1e-6,
        settings(),
        &["out", "current:u1", "current:load"],
    );
    (
        run.column("out")[0],
        run.column("current:u1")[0],
        run.column("current:load")[0],
    )
}

#[test]
fn regulator_regulates_and_follows_input_minus_dropout() {
    // Regulating: 12 V less the 50 mohm output resistance drop.
    let (vout, iin, iload) = regulator(20.0);
    assert!((vout - 12.0).abs() < 0.01, "{vout}");
    // Input current follows the load current plus the quiescent current (model definition).
    assert!((iin - iload - 5e-3).abs() < 1e-5, "{iin} {iload}");
    // In dropout the output follows input minus dropout (data-sheet definition of dropout).
    for vin in [8.0, 10.0, 13.5] {
        let (vout, ..) = regulator(vin);
        assert!((vout - (vin - 2.0)).abs() < 0.01, "vin {vin}: {vout}");
    }
}

#[test]
fn reference_guard_powers_up_and_settles_near_the_hand_estimates() {
    let text = sagtrip::builtin::REFERENCE_GUARD;
    let run = simulate(
        text,
        Start::Rest,
        2.0,
        settings(),
        &["sense", "ref_hi", "ref_lo", "vcc", "ref"],
    );
    let pickup = run
        .trace
        .events
        .iter()
        .find(|e| e.kind == EventKind::PickUp)
        .map(|e| e.time)
        .unwrap();
    // "energised well under a second after power-up" (the guard's design estimate).
    assert!(pickup > 0.3 && pickup < 1.0, "{pickup}");
    let last = |name: &str| *run.column(name).last().unwrap();
    // Zener at 5 mA gives 5.1 V; with (12 - 5.1)/2.2k = 3.1 mA into the zener and 1 mA
    // into the divider it sits a little lower: within 50 mV (zener slope 10 ohm).
    assert!((last("ref") - 5.1).abs() < 0.05, "{}", last("ref"));
    // Divider: ref_hi = ref (2.4k + 5.6k) / 9.8k, ref_lo = ref 5.6k / 9.8k.
    assert!((last("ref_hi") - last("ref") * 8.0 / 9.8).abs() < 1e-3);
    assert!((last("ref_lo") - last("ref") * 5.6 / 9.8).abs() < 1e-3);
    assert!((last("vcc") - 12.0).abs() < 0.05);
    let sense = last("sense");
    assert!(sense > last("ref_lo") && sense < last("ref_hi"), "{sense}");
}

#[test]
fn monostable_timer_pulse_lasts_1_1_rc() {
    // Classic monostable: a trigger pulse sets the flip-flop; the capacitor charges through
    // R from 0 to 2/3 of the supply: t = RC ln 3 = 1.0986 RC (timer data sheets;
    // derived). R = 100 kohm, C = 100 nF: 10.986 ms.
    let text = r#"
[part.supply]
kind = "voltage-source"
pins = ["vcc", "gnd"]
dc = "9V"
[part.kick]
kind = "voltage-source"
pins = ["k", "gnd"]
step = { before = "9V", after = "0V", at = "1ms" }
[part.c_kick]
kind = "capacitor"
pins = ["k", "trig"]
capacitance = "1n"
[part.r_pull]
kind = "resistor"
pins = ["vcc", "trig"]
resistance = "10k"
[part.u1]
kind = "timer"
pins = { supply_plus = "vcc", supply_minus = "gnd", trigger = "trig", threshold = "c", reset = "vcc", output = "out", discharge = "c" }
discharge_resistance = "1"
[part.r_t]
kind = "resistor"
pins = ["vcc", "c"]
resistance = "100k"
[part.c_t]
kind = "capacitor"
pins = ["c", "gnd"]
capacitance = "100n"
[part.load]
kind = "resistor"
pins = ["out", "gnd"]
resistance = "10k"
"#;
    let run = simulate(text, Start::OperatingPoint, 20e-3, settings(), &["out"]);
    let set = run
        .trace
        .events
        .iter()
        .find(|e| e.kind == EventKind::TimerSet)
        .unwrap()
        .time;
    let reset = run
        .trace
        .events
        .iter()
        .find(|e| e.kind == EventKind::TimerReset && e.time > set)
        .unwrap()
        .time;
    // The trigger fires at the kick (1 ms); the discharge switch held the capacitor at
    // about 0.9 mV (1 ohm against 100 kohm), negligible here.
    assert!((set - 1e-3).abs() < 10e-6, "{set}");
    let width = reset - set;
    assert!(
        (width / (3f64.ln() * 100e3 * 100e-9) - 1.0).abs() < 0.01,
        "{width}"
    );
}

#[test]
fn a_slow_comparator_follows_its_first_order_lag_at_default_settings() {
    // A comparator with response_time = 1 ms, its input stepped across the threshold at
    // 1 ms: the lag (docs/models.md) makes the output rise as a first-order response,
    // reaching half its swing tau ln 2 after the step and 1 - 1/e after tau (RC step
    // response, Hayt, Kemmerly and Durbin). Checked at default settings to 0.1%.
    let text = r#"
[part.supply]
kind = "voltage-source"
pins = ["vcc", "gnd"]
dc = "12V"
[part.reference]
kind = "voltage-source"
pins = ["ref", "gnd"]
dc = "5V"
[part.signal]
kind = "voltage-source"
pins = ["in", "gnd"]
step = { before = "4V", after = "6V", at = "1ms" }
[part.r_load]
kind = "resistor"
pins = ["out", "gnd"]
resistance = "1G"
[part.u1]
kind = "comparator"
pins = { plus = "in", minus = "ref", output = "out", supply_plus = "vcc", supply_minus = "gnd" }
response_time = "1ms"
"#;
    let run = simulate(text, Start::OperatingPoint, 8e-3, settings(), &["out"]);
    let (low, high) = (0.05, 10.5);
    for (fraction, after) in [
        (0.5, 1e-3 * 2f64.ln()),
        (1.0 - (-1.0f64).exp(), 1e-3),
        (0.9, 1e-3 * 10f64.ln()),
    ] {
        let level = low + fraction * (high - low);
        let out = run.column("out");
        let k = out.iter().position(|&v| v >= level).unwrap();
        let (t0, t1) = (run.trace.time[k - 1], run.trace.time[k]);
        let (v0, v1) = (out[k - 1], out[k]);
        // The crossing between the two samples, on the exponential through them.
        let gap = |v: f64| (high - v).ln();
        let t = t0 + (t1 - t0) * (gap(v0) - gap(level)) / (gap(v0) - gap(v1));
        let measured = t - 1e-3;
        assert!(
            (measured / after - 1.0).abs() < 1e-3,
            "{fraction}: {measured} s after the step, expected {after} s"
        );
    }
}
