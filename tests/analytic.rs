//! Linear circuits against their closed-form solutions.
//! Source for every formula here: Hayt, Kemmerly and Durbin, Engineering Circuit Analysis
//! (first- and second-order transient responses).

mod common;

use common::{settings, simulate};
use sagtrip::engine::Start;

const RC_STEP: &str = r#"
[part.drive]
kind = "voltage-source"
pins = ["in", "gnd"]
step = { before = "0V", after = "5V", at = "1ms" }
[part.r1]
kind = "resistor"
pins = ["in", "out"]
resistance = "1k"
[part.c1]
kind = "capacitor"
pins = ["out", "gnd"]
capacitance = "1u"
"#;

#[test]
fn rc_charge_follows_the_exponential() {
    let run = simulate(RC_STEP, Start::OperatingPoint, 8e-3, settings(), &["out"]);
    let tau = 1e-3;
    let mut worst = 0.0_f64;
    for (t, v) in run.trace.time.iter().zip(run.column("out")) {
        // RC charge: v = Vf (1 - exp(-(t - t0)/RC)) (Hayt, Kemmerly and Durbin).
        let expected = if *t < 1e-3 {
            0.0
        } else {
            5.0 * (1.0 - (-(t - 1e-3) / tau).exp())
        };
        worst = worst.max((v - expected).abs());
    }
    // 0.1% of the 5 V step.
    assert!(worst < 5e-3, "worst error {worst} V");
}

#[test]
fn rc_discharge_follows_the_exponential() {
    let text = RC_STEP.replace(
        r#"step = { before = "0V", after = "5V", at = "1ms" }"#,
        r#"step = { before = "5V", after = "0V", at = "1ms" }"#,
    );
    let run = simulate(&text, Start::OperatingPoint, 8e-3, settings(), &["out"]);
    let mut worst = 0.0_f64;
    for (t, v) in run.trace.time.iter().zip(run.column("out")) {
        // RC discharge: v = V0 exp(-(t - t0)/RC) (Hayt, Kemmerly and Durbin).
        let expected = if *t < 1e-3 {
            5.0
        } else {
            5.0 * (-(t - 1e-3) / 1e-3).exp()
        };
        worst = worst.max((v - expected).abs());
    }
    assert!(worst < 5e-3, "worst error {worst} V");
    // Time to fall to 1 V: t = RC ln(V0 / v) = 1 ms ln 5 = 1.6094 ms after the step.
    let (times, v) = (&run.trace.time, run.column("out"));
    let k = (1..v.len())
        .find(|&k| v[k - 1] >= 1.0 && v[k] < 1.0)
        .unwrap();
    let w = (v[k - 1] - 1.0) / (v[k - 1] - v[k]);
    let crossing = times[k - 1] + w * (times[k] - times[k - 1]);
    // Linear interpolation between steps adds up to about 30 us here.
    assert!((crossing - 1e-3 - 1.609_438e-3).abs() < 60e-6, "{crossing}");
}

#[test]
fn rl_current_rises_exponentially() {
    let text = r#"
[part.supply]
kind = "voltage-source"
pins = ["a", "gnd"]
dc = "10V"
[part.r1]
kind = "resistor"
pins = ["a", "b"]
resistance = "100"
[part.l1]
kind = "inductor"
pins = ["b", "gnd"]
inductance = "100mH"
"#;
    let run = simulate(text, Start::Rest, 5e-3, settings(), &["current:l1"]);
    let mut worst = 0.0_f64;
    for (t, i) in run.trace.time.iter().zip(run.column("current:l1")) {
        // RL: i = (V/R)(1 - exp(-t R/L)), tau = 1 ms (Hayt, Kemmerly and Durbin).
        let expected = 0.1 * (1.0 - (-t / 1e-3).exp());
        worst = worst.max((i - expected).abs());
    }
    // 0.1% of the final 100 mA.
    assert!(worst < 1e-4, "worst error {worst} A");
}

const RLC: &str = r#"
[part.c1]
kind = "capacitor"
pins = ["top", "gnd"]
capacitance = "1u"
initial_voltage = "1V"
[part.l1]
kind = "inductor"
pins = ["top", "mid"]
inductance = "1mH"
[part.r1]
kind = "resistor"
pins = ["mid", "gnd"]
resistance = "10"
"#;

#[test]
fn series_rlc_rings_at_the_damped_frequency_and_decays() {
    // Default settings: a user expects about 0.1% on a linear circuit.
    let run = simulate(RLC, Start::Rest, 1e-3, settings(), &["top"]);
    // Series RLC, underdamped (Hayt, Kemmerly and Durbin): alpha = R/2L,
    // w0 = 1/sqrt(LC), wd = sqrt(w0^2 - alpha^2),
    // v(t) = V0 exp(-alpha t)(cos wd t + (alpha/wd) sin wd t).
    let alpha = 10.0 / (2.0 * 1e-3);
    let w0 = 1.0 / (1e-3_f64 * 1e-6).sqrt();
    let wd = (w0 * w0 - alpha * alpha).sqrt();
    let mut worst = 0.0_f64;
    for (t, v) in run.trace.time.iter().zip(run.column("top")) {
        let expected = (-alpha * t).exp() * ((wd * t).cos() + alpha / wd * (wd * t).sin());
        worst = worst.max((v - expected).abs());
    }
    // 1% of the initial 1 V over five periods.
    assert!(worst < 0.01, "worst error {worst} V");

    // Ringing frequency from the downward zero crossings.
    let times = &run.trace.time;
    let v = run.column("top");
    let crossings = downward_crossings(times, v);
    assert!(crossings.len() >= 4);
    let period = (crossings[3] - crossings[0]) / 3.0;
    let expected_period = 2.0 * std::f64::consts::PI / wd;
    assert!(
        (period / expected_period - 1.0).abs() < 1e-3,
        "period {period} s, expected {expected_period} s"
    );

    // Decay: successive positive peaks shrink by exp(-alpha T).
    let peak = |from: f64, to: f64| {
        times
            .iter()
            .zip(v)
            .filter(|(t, _)| **t >= from && **t < to)
            .map(|(_, v)| *v)
            .fold(f64::NEG_INFINITY, f64::max)
    };
    let first = peak(0.5 * expected_period, 1.5 * expected_period);
    let second = peak(1.5 * expected_period, 2.5 * expected_period);
    let ratio = second / first;
    let expected_ratio = (-alpha * expected_period).exp();
    assert!(
        (ratio / expected_ratio - 1.0).abs() < 0.02,
        "decay ratio {ratio}, expected {expected_ratio}"
    );
}

/// The downward zero crossings of `v`, each on the parabola through the samples around it
/// (a chord would cut the curve of a damped ring early or late by up to a part in 1e4).
fn downward_crossings(times: &[f64], v: &[f64]) -> Vec<f64> {
    let mut crossings = Vec::new();
    for k in 2..v.len() {
        if v[k - 1] > 0.0 && v[k] <= 0.0 {
            // Newton on the Lagrange parabola through samples k-2, k-1, k, from the chord.
            let (t0, t1, t2) = (times[k - 2], times[k - 1], times[k]);
            let (v0, v1, v2) = (v[k - 2], v[k - 1], v[k]);
            let p = |t: f64| {
                v0 * (t - t1) * (t - t2) / ((t0 - t1) * (t0 - t2))
                    + v1 * (t - t0) * (t - t2) / ((t1 - t0) * (t1 - t2))
                    + v2 * (t - t0) * (t - t1) / ((t2 - t0) * (t2 - t1))
            };
            let mut t = t1 + v1 / (v1 - v2) * (t2 - t1);
            for _ in 0..20 {
                let h = 1e-6 * (t2 - t1);
                let slope = (p(t + h) - p(t - h)) / (2.0 * h);
                t -= p(t) / slope;
            }
            crossings.push(t);
        }
    }
    crossings
}

/// Ringing frequency of the LC tank (1 mohm of damping) at truncation-error tolerance `reltol`.
fn lc_frequency(reltol: f64) -> f64 {
    let text = RLC.replace("resistance = \"10\"", "resistance = \"1m\"");
    let mut s = settings();
    s.lte_reltol = reltol;
    let run = simulate(&text, Start::Rest, 2e-3, s, &["top"]);
    let crossings = downward_crossings(&run.trace.time, run.column("top"));
    let n = crossings.len() - 1;
    n as f64 / (crossings[n] - crossings[0])
}

#[test]
fn lc_tank_rings_at_its_resonant_frequency() {
    // LC 1 mH, 1 uF: f0 = 1/(2 pi sqrt(LC)) = 5032.921 Hz (derived; Hayt, Kemmerly and Durbin).
    // The trapezoidal rule shortens the period by about (w h)^2 / 12; the step control
    // keeps that within 0.1% at the default tolerance, and closer at a tenth of it.
    let f0 = 5032.921;
    let default = lc_frequency(settings().lte_reltol);
    assert!(
        (default / f0 - 1.0).abs() < 1e-3,
        "default: f0 = {default} Hz"
    );
    let tight = lc_frequency(settings().lte_reltol / 10.0);
    assert!((tight / f0 - 1.0).abs() < 3e-4, "tight: f0 = {tight} Hz");
    assert!((tight / f0 - 1.0).abs() < (default / f0 - 1.0).abs());
}

/// Driven RC from rest with fixed maximum steps: the trapezoidal rule's error must fall
/// about fourfold when the step halves (second-order accuracy).
#[test]
fn trapezoidal_error_falls_fourfold_when_the_step_halves() {
    let text = r#"
[part.drive]
kind = "voltage-source"
pins = ["in", "gnd"]
sine = { amplitude = "10V", frequency = "200Hz" }
[part.r1]
kind = "resistor"
pins = ["in", "out"]
resistance = "1k"
[part.c1]
kind = "capacitor"
pins = ["out", "gnd"]
capacitance = "1u"
"#;
    let tau: f64 = 1e-3;
    let w = 2.0 * std::f64::consts::PI * 200.0;
    let wt = w * tau;
    // Driven RC from rest: v = A/(1+(w tau)^2) (sin wt - w tau cos wt)
    //                        + A w tau/(1+(w tau)^2) exp(-t/tau)  (Hayt, Kemmerly and Durbin).
    let exact = |t: f64| {
        10.0 / (1.0 + wt * wt) * ((w * t).sin() - wt * (w * t).cos())
            + 10.0 * wt / (1.0 + wt * wt) * (-t / tau).exp()
    };
    let error_with = |max_step: f64| {
        let mut s = settings();
        s.max_step_s = max_step;
        // Truncation-error control off: every step is the maximum (after the restart ramp).
        s.lte_reltol = 1e12;
        let run = simulate(text, Start::Rest, 20e-3, s, &["out"]);
        run.trace
            .time
            .iter()
            .zip(run.column("out"))
            .filter(|(t, _)| **t > 5e-3)
            .map(|(t, v)| (v - exact(*t)).abs())
            .fold(0.0, f64::max)
    };
    let e1 = error_with(100e-6);
    let e2 = error_with(50e-6);
    let e3 = error_with(25e-6);
    let (r1, r2) = (e1 / e2, e2 / e3);
    assert!((3.5..4.5).contains(&r1), "ratio {r1} ({e1} / {e2})");
    assert!((3.5..4.5).contains(&r2), "ratio {r2} ({e2} / {e3})");
}

#[test]
fn an_unloaded_transformer_draws_its_magnetizing_current_at_default_settings() {
    // 230 V, 50 Hz on a primary of 8 H and 40 ohm with the secondary open (1 Mohm, whose
    // reflection through the 230:15 ratio is about 2e8 ohm, negligible): in the steady
    // state the primary current is the magnetizing current, of peak
    // Vpk / |R + j w L| (phasor analysis, Hayt, Kemmerly and Durbin). The switch-on offset
    // decays with L/R = 0.2 s; after 2.4 s it is under 1e-5 of the peak. Default settings,
    // to 0.1%.
    let text = r#"
[part.mains]
kind = "voltage-source"
pins = ["line", "gnd"]
sine = { rms = "230V", frequency = "50Hz" }
[part.xfmr]
kind = "transformer"
pins = { primary_a = "line", primary_b = "gnd", secondary_a = "sec_a", secondary_b = "gnd" }
primary_inductance = "8H"
primary_resistance = "40"
secondary_inductance = "34.0mH"
secondary_resistance = "1.2"
coupling = 0.998
[part.r_open]
kind = "resistor"
pins = ["sec_a", "gnd"]
resistance = "1M"
"#;
    let run = simulate(text, Start::Rest, 2.44, settings(), &["current:mains"]);
    // The amplitude of the last cycle by a least-squares fit of a sin + b cos + c at the
    // step points (the largest sample alone would fall short of the crest between steps).
    let w = 2.0 * std::f64::consts::PI * 50.0;
    let from = run.trace.time.partition_point(|&t| t < 2.42);
    let (times, current) = (
        &run.trace.time[from..],
        &run.column("current:mains")[from..],
    );
    let mut normal = [[0.0f64; 4]; 3];
    for (t, i) in times.iter().zip(current) {
        let basis = [(w * t).sin(), (w * t).cos(), 1.0];
        for r in 0..3 {
            for c in 0..3 {
                normal[r][c] += basis[r] * basis[c];
            }
            normal[r][3] += basis[r] * i;
        }
    }
    // Gauss-Jordan on the 3 x 3 normal equations.
    for p in 0..3 {
        for r in 0..3 {
            if r != p {
                let f = normal[r][p] / normal[p][p];
                let pivot_row = normal[p];
                for (entry, pivot) in normal[r].iter_mut().zip(pivot_row) {
                    *entry -= f * pivot;
                }
            }
        }
    }
    let (a, b) = (normal[0][3] / normal[0][0], normal[1][3] / normal[1][1]);
    let peak = a.hypot(b);
    let expected = 230.0 * 2f64.sqrt() / (40.0f64.powi(2) + (w * 8.0).powi(2)).sqrt();
    assert!(
        (peak / expected - 1.0).abs() < 1e-3,
        "magnetizing current peak {peak} A, expected {expected} A"
    );
}
