//! Voltage-controlled switch with hysteresis.
//!
//! The switch is a resistor whose value is the on or off resistance by its mode. An open
//! switch closes when the control voltage rises above `on_voltage`; a closed switch opens
//! when it falls below `off_voltage`. The engine locates each crossing in time.

/// Crossing function: positive once the switch must change state.
pub(super) fn crossing(control: f64, closed: bool, on_voltage: f64, off_voltage: f64) -> f64 {
    if closed {
        off_voltage - control
    } else {
        control - on_voltage
    }
}
