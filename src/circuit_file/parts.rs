//! Parts: each part's kind, pins and parameters, its waveform, and its model specification.

use super::*;

impl Reader<'_> {
    pub(super) fn part(
        &mut self,
        name: &Spanned<std::borrow::Cow<'_, str>>,
        body: &Spanned<DeValue<'_>>,
        nodes: &mut Vec<String>,
        sets: &mut [(String, ParameterSet)],
    ) -> Option<(Part, PartOrigin)> {
        let part_name = name.get_ref().to_string();
        let path = format!("part.{part_name}");
        let Some(table) = body.get_ref().as_table() else {
            self.problem(body.span(), &path, "must be a table");
            return None;
        };
        let problems_before = self.problems.len();
        let kind = match table.get("kind") {
            Some(v) => match v.get_ref().as_str() {
                Some(k) if kind_named(k).is_some() => k.to_string(),
                Some(k) => {
                    self.problem(
                        v.span(),
                        &format!("{path}.kind"),
                        format!(
                            "unknown part kind `{k}` (known: {})",
                            kind_names().join(", ")
                        ),
                    );
                    return None;
                }
                None => {
                    self.problem(v.span(), &format!("{path}.kind"), "must be a string");
                    return None;
                }
            },
            None => {
                self.problem(
                    name.span(),
                    &path,
                    format!("missing `kind` (one of {})", kind_names().join(", ")),
                );
                return None;
            }
        };

        // Pins.
        let mut pins = self.part_pins(
            &kind,
            &path,
            name.span(),
            table.get("pins"),
            nodes,
            problems_before,
        );

        // Parameter set.
        let mut values = self.set_values(&kind, &path, &part_name, table.get("uses"), sets);
        let mut order = Vec::new();

        // Parameters written on the part override the set's.
        let is_source = kind == "voltage-source" || kind == "current-source";
        let reserved = ["kind", "pins", "uses"];
        let waveform_keys = ["dc", "sine", "step"];
        self.parameters(
            table.iter().filter(|(k, _)| {
                let k = k.get_ref().as_ref();
                !(reserved.contains(&k) || is_source && waveform_keys.contains(&k))
            }),
            fields_of(&kind),
            &path,
            &format!("a {kind}"),
            &mut values,
            &mut order,
        );

        let waveform = if is_source {
            self.waveform(table, name.span(), &path, &kind)
        } else {
            None
        };

        if self.problems.len() > problems_before {
            return None;
        }
        // A relay's normally-closed contact may be left unconnected.
        let normally_closed_absent = kind == "relay" && pins[4].is_none();
        if normally_closed_absent {
            pins[4] = Some((0, 0..0));
        }
        let mut spec = self.spec(&kind, &values, waveform, name.span(), &path)?;
        if let PartSpec::Relay(r) = &mut spec {
            r.normally_closed_connected = !normally_closed_absent;
        }
        let origin = PartOrigin {
            name_span: name.span(),
            pin_spans: pins
                .iter()
                .map(|p| p.as_ref().map_or(0..0, |p| p.1.clone()))
                .collect(),
        };
        Some((
            Part {
                name: part_name,
                pins: pins.into_iter().map(|p| p.map_or(0, |p| p.0)).collect(),
                spec,
            },
            origin,
        ))
    }

    /// A part's pins (`pins` as a list or a table), each a node and where it was written;
    /// a missing or extra pin is a problem. A relay may leave its normally-closed pin out.
    #[allow(clippy::too_many_arguments)]
    pub(super) fn part_pins(
        &mut self,
        kind: &str,
        path: &str,
        name_span: Range<usize>,
        pins_value: Option<&Spanned<DeValue<'_>>>,
        nodes: &mut Vec<String>,
        problems_before: usize,
    ) -> Vec<Option<(NodeId, Range<usize>)>> {
        let pin_names = pin_names(kind);
        let mut pins: Vec<Option<(NodeId, Range<usize>)>> = vec![None; pin_names.len()];
        match pins_value {
            None => self.problem(
                name_span.clone(),
                &format!("{path}.pins"),
                format!("missing `pins` ({})", pin_names.join(", ")),
            ),
            Some(v) => match v.get_ref() {
                DeValue::Array(list) => {
                    let optional_last = kind == "relay" && list.len() + 1 == pin_names.len();
                    if list.len() != pin_names.len() && !optional_last {
                        self.problem(
                            v.span(),
                            &format!("{path}.pins"),
                            format!(
                                "a {kind} has {} pins ({}), found {}",
                                pin_names.len(),
                                pin_names.join(", "),
                                list.len()
                            ),
                        );
                    } else {
                        for (i, item) in list.iter().enumerate() {
                            let pin_path = format!("{path}.pins.{}", pin_names[i]);
                            if let Some(n) = self.node_name(item, &pin_path) {
                                pins[i] = Some((Self::node_id(nodes, &n), item.span()));
                            }
                        }
                    }
                }
                DeValue::Table(named) => {
                    for (pin, item) in named {
                        let pin_path = format!("{path}.pins.{}", pin.get_ref());
                        match pin_names.iter().position(|p| p == pin.get_ref()) {
                            Some(i) => {
                                if let Some(n) = self.node_name(item, &pin_path) {
                                    pins[i] = Some((Self::node_id(nodes, &n), item.span()));
                                }
                            }
                            None => self.problem(
                                pin.span(),
                                &pin_path,
                                format!(
                                    "extra pin `{}`: a {kind} has pins {}",
                                    pin.get_ref(),
                                    pin_names.join(", ")
                                ),
                            ),
                        }
                    }
                    let missing: Vec<&str> = pin_names
                        .iter()
                        .zip(&pins)
                        .filter(|(n, p)| {
                            p.is_none() && !(kind == "relay" && **n == "normally_closed")
                        })
                        .map(|(n, _)| *n)
                        .collect();
                    if !missing.is_empty() && self.problems.len() == problems_before {
                        self.problem(
                            v.span(),
                            &format!("{path}.pins"),
                            format!(
                                "missing pin{} {}",
                                if missing.len() > 1 { "s" } else { "" },
                                missing.join(", ")
                            ),
                        );
                    }
                }
                _ => self.problem(
                    v.span(),
                    &format!("{path}.pins"),
                    format!(
                        "must be a list of node names [{}] or a table {{ {} = \"node\", ... }}",
                        pin_names.join(", "),
                        pin_names.first().unwrap_or(&"pin")
                    ),
                ),
            },
        }
        pins
    }

    /// The values of the parameter set a part `uses` (noting its use), or none; an
    /// unknown set, or one of another family, is a problem.
    pub(super) fn set_values(
        &mut self,
        kind: &str,
        path: &str,
        part_name: &str,
        uses: Option<&Spanned<DeValue<'_>>>,
        sets: &mut [(String, ParameterSet)],
    ) -> HashMap<String, Located> {
        let mut values: HashMap<String, Located> = HashMap::new();
        if let Some(v) = uses {
            let family = family_of(kind);
            match (v.get_ref().as_str(), family) {
                (Some(set_name), Some(family)) => {
                    match sets.iter_mut().find(|(n, _)| n == set_name) {
                        Some((_, set)) if set.family == family => {
                            set.used_by.push(part_name.to_string());
                            values.extend(set.values.iter().map(|(k, l)| (k.clone(), l.clone())));
                        }
                        Some((_, set)) => {
                            let set_family = set.family.clone();
                            self.problem(
                                v.span(),
                                &format!("{path}.uses"),
                                format!(
                                    "parameter set `{set_name}` is for a {set_family}, but this part is a {kind} (needs a {family} set)"
                                ),
                            );
                        }
                        None => {
                            let known: Vec<&str> = sets
                                .iter()
                                .filter(|(_, s)| s.family == family)
                                .map(|(n, _)| n.as_str())
                                .collect();
                            self.problem(
                                v.span(),
                                &format!("{path}.uses"),
                                format!(
                                    "unknown parameter set `{set_name}`{}",
                                    if known.is_empty() {
                                        format!(" (no {family} sets are declared)")
                                    } else {
                                        format!(" (known {family} sets: {})", known.join(", "))
                                    }
                                ),
                            );
                        }
                    }
                }
                (None, _) => self.problem(
                    v.span(),
                    &format!("{path}.uses"),
                    "must be the name of a parameter set",
                ),
                (_, None) => self.problem(
                    v.span(),
                    &format!("{path}.uses"),
                    format!("a {kind} cannot use a parameter set"),
                ),
            }
        }
        values
    }

    pub(super) fn waveform(
        &mut self,
        table: &DeTable<'_>,
        name_span: Range<usize>,
        path: &str,
        kind: &str,
    ) -> Option<Waveform> {
        let unit = if kind == "voltage-source" {
            Quantity::Voltage
        } else {
            Quantity::Current
        };
        let present: Vec<Entry<'_, '_>> = table
            .iter()
            .filter(|(k, _)| ["dc", "sine", "step"].contains(&k.get_ref().as_ref()))
            .collect();
        if present.len() != 1 {
            let span = present.get(1).map_or(name_span, |(k, _)| k.span());
            self.problem(
                span,
                path,
                "a source needs exactly one waveform: dc = VALUE, sine = { ... } or step = { ... }",
            );
            return None;
        }
        let (key, value) = present[0];
        let wpath = format!("{path}.{}", key.get_ref());
        match key.get_ref().as_ref() {
            "dc" => self.number(value, &wpath, unit).map(Waveform::Constant),
            shape => {
                let Some(body) = value.get_ref().as_table() else {
                    self.problem(
                        value.span(),
                        &wpath,
                        format!("must be a table {{ ... }} of {shape} settings"),
                    );
                    return None;
                };
                let fields = if shape == "sine" {
                    SINE_FIELDS
                } else {
                    STEP_FIELDS
                };
                let mut v = HashMap::new();
                let mut order = Vec::new();
                let before = self.problems.len();
                // Amplitude-like fields carry the source's unit.
                for (k, item) in body {
                    let name = k.get_ref().as_ref();
                    if ["amplitude", "rms", "offset", "before", "after"].contains(&name) {
                        if let Some(x) = self.number(item, &format!("{wpath}.{name}"), unit) {
                            v.insert(
                                name.to_string(),
                                Located {
                                    value: x,
                                    span: item.span(),
                                },
                            );
                        }
                    }
                }
                self.parameters(
                    body.iter().filter(|(k, _)| {
                        !["amplitude", "rms", "offset", "before", "after"]
                            .contains(&k.get_ref().as_ref())
                    }),
                    fields,
                    &wpath,
                    &format!("a {shape} waveform"),
                    &mut v,
                    &mut order,
                );
                // A field given but refused is already a problem: not also a missing one.
                if self.problems.len() == before {
                    for f in fields {
                        if f.required && !v.contains_key(f.name) {
                            self.problem(value.span(), &wpath, format!("missing `{}`", f.name));
                        }
                    }
                }
                if self.problems.len() > before {
                    return None;
                }
                let get = |n: &str, d: f64| v.get(n).map_or(d, |l| l.value);
                if shape == "sine" {
                    let amplitude = match (v.get("amplitude"), v.get("rms")) {
                        (Some(a), None) => a.value,
                        (None, Some(r)) => r.value * std::f64::consts::SQRT_2,
                        _ => {
                            self.problem(
                                value.span(),
                                &wpath,
                                "give exactly one of `amplitude` (peak) or `rms`",
                            );
                            return None;
                        }
                    };
                    Some(Waveform::Sine {
                        amplitude,
                        frequency_hz: get("frequency", 0.0),
                        phase_deg: get("phase", 0.0),
                        offset: get("offset", 0.0),
                    })
                } else {
                    Some(Waveform::Step {
                        before: get("before", 0.0),
                        after: get("after", 0.0),
                        at_s: get("at", 0.0),
                    })
                }
            }
        }
    }

    /// Builds the typed part from its collected values, filling defaults.
    pub(super) fn spec(
        &mut self,
        kind: &str,
        values: &HashMap<String, Located>,
        waveform: Option<Waveform>,
        name_span: Range<usize>,
        path: &str,
    ) -> Option<PartSpec> {
        let fields = fields_of(kind);
        let mut missing = Vec::new();
        for f in fields {
            if f.required && !values.contains_key(f.name) {
                missing.push(f.name);
            }
        }
        if !missing.is_empty() {
            self.problem(
                name_span,
                path,
                format!(
                    "missing parameter{} {} for a {kind}",
                    if missing.len() > 1 { "s" } else { "" },
                    missing.join(", ")
                ),
            );
            return None;
        }
        match kind_named(kind)?.build {
            Build::Passive => Self::passive_spec(kind, values, fields, waveform),
            Build::Semiconductor => self.semiconductor_spec(kind, values, fields, name_span, path),
            Build::Control => self.control_spec(kind, values, fields, name_span, path),
        }
    }

    /// The model specification of a part of this family: resistors, capacitors, inductors,
    /// transformers and sources (`None` for a source without its waveform, already noted).
    pub(super) fn passive_spec(
        kind: &str,
        values: &HashMap<String, Located>,
        fields: &[Field],
        waveform: Option<Waveform>,
    ) -> Option<PartSpec> {
        let get = |n: &str| value_or_default(values, fields, n);
        let opt = |n: &str| values.get(n).map(|l| l.value);
        Some(match kind {
            "resistor" => PartSpec::Resistor {
                resistance: get("resistance"),
            },
            "capacitor" => PartSpec::Capacitor {
                capacitance: get("capacitance"),
                initial_voltage: opt("initial_voltage"),
            },
            "inductor" => PartSpec::Inductor {
                inductance: get("inductance"),
                series_resistance: get("series_resistance"),
                initial_current: opt("initial_current"),
            },
            "transformer" => PartSpec::Transformer(TransformerParams {
                primary_inductance: get("primary_inductance"),
                primary_resistance: get("primary_resistance"),
                secondary_inductance: get("secondary_inductance"),
                secondary_resistance: get("secondary_resistance"),
                coupling: get("coupling"),
            }),
            "voltage-source" => PartSpec::VoltageSource(waveform?),
            "current-source" => PartSpec::CurrentSource(waveform?),
            _ => return None,
        })
    }

    /// The model specification of a part of this family: diodes, bridges, LEDs, MOSFETs and bipolar transistors. `None` (with the problem
    /// noted) when its values contradict each other.
    pub(super) fn semiconductor_spec(
        &mut self,
        kind: &str,
        values: &HashMap<String, Located>,
        fields: &[Field],
        name_span: Range<usize>,
        path: &str,
    ) -> Option<PartSpec> {
        let get = |n: &str| value_or_default(values, fields, n);
        let opt = |n: &str| values.get(n).map(|l| l.value);
        Some(match kind {
            "diode" | "bridge" => {
                let breakdown = opt("breakdown_voltage").map(|voltage| {
                    let current = get("breakdown_current");
                    Breakdown {
                        voltage,
                        current,
                        slope_resistance: opt("breakdown_resistance")
                            .unwrap_or(THERMAL_VOLTAGE / current),
                    }
                });
                let params = DiodeParams {
                    saturation_current: get("saturation_current"),
                    emission_coefficient: get("emission_coefficient"),
                    series_resistance: get("series_resistance"),
                    breakdown,
                };
                if kind == "diode" {
                    PartSpec::Diode(params)
                } else {
                    PartSpec::Bridge(params)
                }
            }
            "led" => {
                // Choose Is so that the junction drops forward_voltage at forward_current.
                let n = get("emission_coefficient");
                let vf = get("forward_voltage") - get("forward_current") * get("series_resistance");
                if vf <= 0.0 {
                    self.problem(
                        values
                            .get("forward_voltage")
                            .map_or(name_span, |l| l.span.clone()),
                        &format!("{path}.forward_voltage"),
                        "must exceed forward_current x series_resistance",
                    );
                    return None;
                }
                let saturation_current =
                    get("forward_current") / ((vf / (n * THERMAL_VOLTAGE)).exp() - 1.0);
                PartSpec::Diode(DiodeParams {
                    saturation_current,
                    emission_coefficient: n,
                    series_resistance: get("series_resistance"),
                    breakdown: opt("breakdown_voltage").map(|voltage| Breakdown {
                        voltage,
                        current: 1e-3,
                        slope_resistance: THERMAL_VOLTAGE / 1e-3,
                    }),
                })
            }
            "nmos" | "pmos" => PartSpec::Mosfet(MosfetParams {
                polarity: if kind == "nmos" { 1.0 } else { -1.0 },
                threshold_voltage: get("threshold_voltage"),
                transconductance: get("transconductance"),
                channel_length_modulation: get("channel_length_modulation"),
                body_diode: (get("body_diode") != 0.0).then(|| DiodeParams {
                    saturation_current: get("body_diode_saturation_current"),
                    emission_coefficient: get("body_diode_emission_coefficient"),
                    series_resistance: 0.0,
                    breakdown: None,
                }),
            }),
            "npn" | "pnp" => PartSpec::Bipolar(BipolarParams {
                polarity: if kind == "npn" { 1.0 } else { -1.0 },
                saturation_current: get("saturation_current"),
                forward_beta: get("forward_beta"),
                reverse_beta: get("reverse_beta"),
            }),
            _ => return None,
        })
    }

    /// The model specification of a part of this family: switches, comparators, regulators, relays and timers. `None` (with the problem
    /// noted) when its values contradict each other.
    pub(super) fn control_spec(
        &mut self,
        kind: &str,
        values: &HashMap<String, Located>,
        fields: &[Field],
        name_span: Range<usize>,
        path: &str,
    ) -> Option<PartSpec> {
        let get = |n: &str| value_or_default(values, fields, n);
        Some(match kind {
            "switch" => {
                let (on, off) = (get("on_voltage"), get("off_voltage"));
                if off > on {
                    self.problem(
                        values.get("off_voltage").map_or(name_span, |l| l.span.clone()),
                        &format!("{path}.off_voltage"),
                        format!("must not exceed on_voltage ({on} V): the switch needs on_voltage >= off_voltage"),
                    );
                    return None;
                }
                PartSpec::Switch(SwitchParams {
                    on_voltage: on,
                    off_voltage: off,
                    on_resistance: get("on_resistance"),
                    off_resistance: get("off_resistance"),
                })
            }
            "comparator" => PartSpec::Comparator(ComparatorParams {
                low_headroom: get("low_headroom"),
                high_headroom: get("high_headroom"),
                gain: get("gain"),
                output_resistance: get("output_resistance"),
                response_time: get("response_time"),
                input_offset: get("input_offset"),
                hysteresis: get("hysteresis"),
            }),
            "regulator" => PartSpec::Regulator(RegulatorParams {
                output_voltage: get("output_voltage"),
                dropout_voltage: get("dropout_voltage"),
                quiescent_current: get("quiescent_current"),
                current_limit: get("current_limit"),
                output_resistance: get("output_resistance"),
            }),
            "relay" => {
                let (pickup, dropout) = (get("pickup_current"), get("dropout_current"));
                if dropout >= pickup {
                    self.problem(
                        values
                            .get("dropout_current")
                            .map_or(name_span, |l| l.span.clone()),
                        &format!("{path}.dropout_current"),
                        format!("must be below pickup_current ({pickup} A)"),
                    );
                    return None;
                }
                let bounce_count = get("bounce_count");
                if bounce_count > 0.0 && get("bounce_time") <= 0.0 {
                    self.problem(
                        values
                            .get("bounce_count")
                            .map_or(name_span, |l| l.span.clone()),
                        &format!("{path}.bounce_time"),
                        "bounces need a positive bounce_time",
                    );
                    return None;
                }
                PartSpec::Relay(RelayParams {
                    coil_resistance: get("coil_resistance"),
                    coil_inductance: get("coil_inductance"),
                    pickup_current: pickup,
                    dropout_current: dropout,
                    close_travel: get("close_travel"),
                    open_travel: get("open_travel"),
                    bounce_count: bounce_count as u32,
                    bounce_time: get("bounce_time"),
                    contact_resistance: get("contact_resistance"),
                    open_resistance: get("open_resistance"),
                    normally_closed_connected: true,
                })
            }
            "timer" => PartSpec::Timer(TimerParams {
                high_headroom: get("high_headroom"),
                low_headroom: get("low_headroom"),
                output_resistance: get("output_resistance"),
                discharge_resistance: get("discharge_resistance"),
                reset_voltage: get("reset_voltage"),
                supply_current: get("supply_current"),
            }),
            _ => return None,
        })
    }
}

/// A parameter's value, or its field's default (0 where it has none).
fn value_or_default(values: &HashMap<String, Located>, fields: &[Field], n: &str) -> f64 {
    values.get(n).map_or_else(
        || {
            fields
                .iter()
                .find(|f| f.name == n)
                .and_then(|f| f.default)
                .unwrap_or(0.0)
        },
        |l| l.value,
    )
}
