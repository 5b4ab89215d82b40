//! Circuits compiled into the binary.

/// The reference guard of `examples/guard-230v.toml`: the default circuit whenever none is
/// given.
pub const REFERENCE_GUARD: &str = include_str!("../examples/guard-230v.toml");

/// The name the reference guard is reported under.
pub const REFERENCE_GUARD_NAME: &str = "built-in reference guard (examples/guard-230v.toml)";
