//! Circuits compiled into the binary.

/// The reference guard of `examples/guard-230v.toml`: the default circuit whenever none is
/// given.
pub const REFERENCE_GUARD: &str = include_str!("../examples/guard-230v.toml");

/// The name the reference guard is reported under.
pub const REFERENCE_GUARD_NAME: &str = "built-in reference guard (examples/guard-230v.toml)";

/// A circuit bundled into the binary, to start a design from.
#[derive(Clone, Copy, Debug)]
pub struct Bundled {
    /// Its name (`sagtrip new --from NAME`).
    pub name: &'static str,
    /// The file's text (comments included).
    pub text: &'static str,
}

impl Bundled {
    /// The first sentence of its leading comment (what it is), cut to about 100
    /// characters.
    pub fn summary(&self) -> String {
        let comment: Vec<&str> = self
            .text
            .lines()
            .map_while(|l| l.strip_prefix('#'))
            .map(str::trim)
            .collect();
        let joined = comment.join(" ");
        let sentence = joined
            .split_once(". ")
            .map_or(joined.trim_end_matches('.'), |(first, _)| first);
        if sentence.chars().count() <= 100 {
            return sentence.to_string();
        }
        let cut: String = sentence.chars().take(97).collect();
        let cut = cut.rsplit_once(' ').map_or(cut.as_str(), |(head, _)| head);
        format!("{cut}...")
    }
}

/// A bundled example by its file name in `examples/`.
macro_rules! example {
    ($name:literal) => {
        Bundled {
            name: $name,
            text: include_str!(concat!("../examples/", $name, ".toml")),
        }
    };
}

/// Every bundled circuit: the examples of the project, the reference guard first.
pub const BUNDLED: &[Bundled] = &[
    Bundled {
        name: "guard-230v",
        text: REFERENCE_GUARD,
    },
    example!("guard-230v-hysteresis"),
    example!("guard-230v-tolerances"),
    example!("guard-230v-beeper"),
    example!("guard-230v-compressor"),
    example!("guard-120v-60hz"),
    example!("transformer-supply"),
    example!("bridge-rectifier"),
    example!("half-wave-rectifier"),
    example!("rc-step"),
];

/// The bundled circuit of this name.
pub fn bundled(name: &str) -> Option<&'static Bundled> {
    BUNDLED.iter().find(|b| b.name == name)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_example_is_bundled_and_reads() {
        let examples = std::fs::read_dir(concat!(env!("CARGO_MANIFEST_DIR"), "/examples"))
            .unwrap()
            .filter_map(|e| {
                let name = e.unwrap().file_name().to_string_lossy().to_string();
                name.strip_suffix(".toml").map(str::to_string)
            })
            .collect::<Vec<_>>();
        assert_eq!(examples.len(), BUNDLED.len(), "{examples:?}");
        for name in &examples {
            let b = bundled(name).unwrap_or_else(|| panic!("examples/{name}.toml is not bundled"));
            assert!(!b.summary().is_empty(), "{name}");
            crate::circuit_file::parse_circuit(b.text, name).unwrap();
        }
    }
}
