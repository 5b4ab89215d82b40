//! Junction models against closed forms.

mod common;

use common::{settings, simulate};
use sagtrip::circuit::THERMAL_VOLTAGE;
use sagtrip::engine::Start;

fn series_circuit(volts: f64, ohms: f64, is: f64, n: f64) -> String {
    format!(
        r#"
[part.supply]
kind = "voltage-source"
pins = ["a", "gnd"]
dc = {volts}
[part.r1]
kind = "resistor"
pins = ["a", "k"]
resistance = {ohms}
[part.d1]
kind = "diode"
pins = {{ anode = "k", cathode = "gnd" }}
saturation_current = {is:e}
emission_coefficient = {n}
"#
    )
}

/// Exact current of a resistor in series with a Shockley diode (Banwell and Jayakumar,
/// Electronics Letters 36(4):291-292, 2000):
/// I = (n Vt / R) W0((Is R / (n Vt)) exp((V + Is R) / (n Vt))) - Is,
/// with W0 from the `lambert_w` crate as the outside reference.
fn lambert_current(volts: f64, ohms: f64, is: f64, n: f64) -> f64 {
    let nvt = n * THERMAL_VOLTAGE;
    let x = is * ohms / nvt * ((volts + is * ohms) / nvt).exp();
    nvt / ohms * lambert_w::lambert_w0(x) - is
}

fn simulated_current(volts: f64, ohms: f64, is: f64, n: f64) -> f64 {
    let run = simulate(
        &series_circuit(volts, ohms, is, n),
        Start::OperatingPoint,
        1e-6,
        settings(),
        &["current:r1"],
    );
    run.column("current:r1")[0]
}

#[test]
fn series_resistor_diode_matches_lambert_w() {
    // (V, R, Is, n, golden I derived with the Lambert W closed form, Banwell and Jayakumar 2000)
    let cases = [
        (5.0, 1e3, 1e-14, 1.0, 4.307_456e-3),
        (1.0, 1e3, 1e-14, 1.0, 0.370_853_1e-3),
        (0.5, 1e3, 1e-14, 1.0, 2.296_424e-6),
        (5.0, 100.0, 1e-12, 1.5, 40.52837e-3),
    ];
    for (v, r, is, n, golden) in cases {
        let reference = lambert_current(v, r, is, n);
        let got = simulated_current(v, r, is, n);
        assert!(
            (got / reference - 1.0).abs() < 1e-6,
            "V={v}: simulated {got}, Lambert W {reference}"
        );
        // Golden values are given to 7 significant figures.
        assert!(
            (got / golden - 1.0).abs() < 2e-6,
            "V={v}: {got} vs {golden}"
        );
    }
}

#[test]
fn zener_drops_its_breakdown_voltage_at_the_stated_current() {
    // 12 V through 1.38 kohm into a 5.1 V zener: (12 - 5.1) / 1380 = 5 mA flows, so the
    // zener must sit at its stated breakdown voltage (data given at 5 mA).
    let text = r#"
[part.supply]
kind = "voltage-source"
pins = ["vcc", "gnd"]
dc = "12V"
[part.r_z]
kind = "resistor"
pins = ["vcc", "ref"]
resistance = "1.38k"
[part.dz]
kind = "diode"
pins = { anode = "gnd", cathode = "ref" }
breakdown_voltage = "5.1V"
breakdown_current = "5mA"
breakdown_resistance = "10"
"#;
    let run = simulate(
        text,
        Start::OperatingPoint,
        1e-6,
        settings(),
        &["ref", "current:r_z"],
    );
    let v = run.column("ref")[0];
    let i = run.column("current:r_z")[0];
    // Zener model definition: V = BV at I = Ibv.
    assert!((i - 5e-3).abs() < 1e-6, "{i}");
    assert!((v - 5.1).abs() < 1e-3, "{v}");

    // Slope: at twice the current the voltage rises by about r_slope * dI (small signal),
    // more precisely nb Vt ln 2 = r_slope Ibv ln 2 for the exponential law.
    let text2 = text.replace("1.38k", "690");
    let run2 = simulate(
        &text2,
        Start::OperatingPoint,
        1e-6,
        settings(),
        &["ref", "current:r_z"],
    );
    let v2 = run2.column("ref")[0];
    let i2 = run2.column("current:r_z")[0];
    let expected = 5.1 + 10.0 * 5e-3 * (i2 / 5e-3).ln();
    assert!((v2 - expected).abs() < 1e-4, "{v2} vs {expected}");
}

#[test]
fn led_drops_its_forward_voltage_at_its_forward_current() {
    let text = r#"
[part.supply]
kind = "voltage-source"
pins = ["vcc", "gnd"]
dc = "12.1V"
[part.r1]
kind = "resistor"
pins = ["vcc", "a"]
resistance = "1k"
[part.led]
kind = "led"
pins = ["a", "gnd"]
forward_voltage = "2.1V"
forward_current = "10mA"
"#;
    let run = simulate(text, Start::OperatingPoint, 1e-6, settings(), &["a"]);
    // (12.1 - 2.1) V / 1 kohm = 10 mA: the LED must then drop exactly 2.1 V.
    assert!((run.column("a")[0] - 2.1).abs() < 1e-4);
}
