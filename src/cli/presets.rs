//! `sagtrip presets`: the built-in IEC 61000-4-11 tests.

use super::*;

pub(crate) fn presets() -> String {
    let mut out = String::new();
    say!(
        out,
        "Preferred test levels and durations of IEC 61000-4-11 (use with --event NAME[@DEGREES]):\n"
    );
    say!(
        out,
        "{:<22} {:<6} {:<28} {:<28} source",
        "name",
        "class",
        "at 50 Hz",
        "at 60 Hz"
    );
    for p in iec_presets() {
        say!(
            out,
            "{:<22} {:<6} {:<28} {:<28} {}",
            p.name,
            p.class,
            p.profile_50hz.spec(),
            p.profile_60hz.spec(),
            p.table
        );
    }
    say!(
        out,
        "\nLevels are the residual voltage in % of nominal; abrupt changes start at 0 degrees\n\
         unless @DEGREES is given and take {} to change. Each test is normally applied three\n\
         times at least 10 s apart; sagtrip simulates one application.",
        Engineering(DEFAULT_EDGE_S, Quantity::Time)
    );
    out
}
