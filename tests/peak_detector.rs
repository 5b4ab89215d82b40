//! A diode-capacitor peak detector fed by a sine, against the same circuit written as an
//! explicit ODE and solved by a general-purpose stiff solver (Radau IIA order 5 from the
//! `differential-equations` crate): the waveforms must agree within 0.1% of the peak.

mod common;

use common::{settings, simulate};
use differential_equations::prelude::*;
use sagtrip::circuit::THERMAL_VOLTAGE;
use sagtrip::engine::Start;

const AMPLITUDE: f64 = 10.0;
const FREQUENCY: f64 = 50.0;
const IS: f64 = 1e-14;
const N: f64 = 1.0;
const C: f64 = 10e-6;
const R: f64 = 10e3;
/// The engine's gmin across the junction and from each node to ground.
const GMIN: f64 = 1e-12;

struct PeakDetector;

impl PeakDetector {
    fn diode(v: f64) -> (f64, f64) {
        let nvt = N * THERMAL_VOLTAGE;
        let e = (v / nvt).exp();
        (IS * (e - 1.0) + GMIN * v, IS * e / nvt + GMIN)
    }
    fn source(t: f64) -> f64 {
        AMPLITUDE * (2.0 * std::f64::consts::PI * FREQUENCY * t).sin()
    }
}

impl ODE<f64, [f64; 1]> for PeakDetector {
    // C dv/dt = I_diode(vs - v) - v/R - gmin v
    fn diff(&self, t: f64, y: &[f64; 1], dydt: &mut [f64; 1]) {
        let (i, _) = Self::diode(Self::source(t) - y[0]);
        dydt[0] = (i - y[0] / R - GMIN * y[0]) / C;
    }

    fn jacobian(&self, t: f64, y: &[f64; 1], j: &mut Matrix<f64>) {
        let (_, g) = Self::diode(Self::source(t) - y[0]);
        j[(0, 0)] = (-g - 1.0 / R - GMIN) / C;
    }
}

#[test]
fn peak_detector_matches_a_stiff_ode_solver() {
    let text = format!(
        r#"
[part.source]
kind = "voltage-source"
pins = ["in", "gnd"]
sine = {{ amplitude = {AMPLITUDE}, frequency = {FREQUENCY} }}
[part.d1]
kind = "diode"
pins = ["in", "out"]
saturation_current = {IS:e}
emission_coefficient = {N}
[part.c1]
kind = "capacitor"
pins = ["out", "gnd"]
capacitance = {C:e}
[part.load]
kind = "resistor"
pins = ["out", "gnd"]
resistance = {R}
"#
    );
    let t_end = 0.1;
    let run = simulate(&text, Start::Rest, t_end, settings(), &["out"]);
    let times: Vec<f64> = run.trace.time.clone();
    let reference = IVP::ode(&PeakDetector, 0.0, t_end, [0.0])
        .t_eval(&times)
        .method(
            ImplicitRungeKutta::radau5()
                .rtol(1e-10)
                .atol(1e-10)
                .h0(1e-9),
        )
        .solve()
        .expect("reference solver");
    assert_eq!(reference.t.len(), times.len());
    let simulated = run.column("out");
    let mut worst = 0.0_f64;
    for (k, y) in reference.y.iter().enumerate() {
        worst = worst.max((simulated[k] - y[0]).abs());
    }
    // 0.1% of the 10 V peak.
    assert!(worst < 0.01, "worst difference {worst} V");
    // The detector really follows the crest (not a trivially flat output).
    let peak = simulated.iter().copied().fold(0.0, f64::max);
    assert!(peak > 9.0, "{peak}");
}
