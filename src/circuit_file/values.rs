//! Values: numbers with units, tolerances, a part's parameters and parameter sets.

use super::*;

impl Reader<'_> {
    /// Reads a number, or a string with SI prefix and unit; a flag from a TOML boolean.
    pub(super) fn number(
        &mut self,
        value: &Spanned<DeValue<'_>>,
        path: &str,
        quantity: Quantity,
    ) -> Option<f64> {
        if quantity == Quantity::Flag {
            // A yes/no setting is a TOML boolean and nothing else.
            return match value.get_ref() {
                DeValue::Boolean(b) => Some(f64::from(u8::from(*b))),
                other => {
                    self.problem(
                        value.span(),
                        path,
                        format!(
                            "expected true or false, found {}",
                            with_article(other.type_str())
                        ),
                    );
                    None
                }
            };
        }
        if let Some(v) = self.toleranced(value, path, quantity) {
            return v;
        }
        let parsed = match value.get_ref() {
            DeValue::Integer(i) => i.as_str().replace('_', "").parse::<f64>().ok(),
            DeValue::Float(x) => x.as_str().replace('_', "").parse::<f64>().ok(),
            DeValue::String(s) => match parse_value(s, quantity) {
                Ok(v) => Some(v),
                Err(e) => {
                    self.problem(value.span(), path, e.to_string());
                    return None;
                }
            },
            other => {
                self.problem(
                    value.span(),
                    path,
                    format!(
                        "expected a number or a value like \"4.7u\", found {}",
                        with_article(other.type_str())
                    ),
                );
                return None;
            }
        };
        match parsed {
            Some(v) if v.is_finite() => Some(v),
            _ => {
                self.problem(value.span(), path, "must be a finite number");
                None
            }
        }
    }

    /// Reads a value with a tolerance: a string `"68k ±1%"` (or `+-1%`, or an absolute
    /// `±0.1V`), or a table `{ value = "68k", min = "67k", max = "69k" }`. Returns `None`
    /// when `value` carries no tolerance (the caller reads it as a plain number), else the
    /// value to use (the written one, or this case's override), after recording it.
    pub(super) fn toleranced(
        &mut self,
        value: &Spanned<DeValue<'_>>,
        path: &str,
        quantity: Quantity,
    ) -> Option<Option<f64>> {
        let span = value.span();
        let (nominal, min, max) = match value.get_ref() {
            DeValue::String(s) => {
                let (left, right) = s
                    .split_once('±')
                    .or_else(|| s.split_once("+-"))
                    .or_else(|| s.split_once("+/-"))?;
                let nominal = match parse_value(left.trim(), quantity) {
                    Ok(v) => v,
                    Err(e) => {
                        self.problem(span, path, e.to_string());
                        return Some(None);
                    }
                };
                let right = right.trim();
                let spread = if let Some(p) = right.strip_suffix('%') {
                    match p.trim().parse::<f64>() {
                        Ok(p) if p.is_finite() && p >= 0.0 => nominal.abs() * p / 100.0,
                        _ => {
                            self.problem(
                                span,
                                path,
                                format!("a tolerance is e.g. ±5% or ±0.1V, found `{right}`"),
                            );
                            return Some(None);
                        }
                    }
                } else {
                    match parse_value(right, quantity) {
                        Ok(a) if a >= 0.0 => a,
                        _ => {
                            self.problem(
                                span,
                                path,
                                format!("a tolerance is e.g. ±5% or ±0.1V, found `{right}`"),
                            );
                            return Some(None);
                        }
                    }
                };
                (nominal, nominal - spread, nominal + spread)
            }
            DeValue::Table(table) => {
                let mut read = |key: &str| -> Option<Option<f64>> {
                    table
                        .get(key)
                        .map(|v| self.number(v, &format!("{path}.{key}"), quantity))
                };
                for (key, _) in table {
                    if !["value", "min", "max"].contains(&key.get_ref().as_ref()) {
                        self.problem(
                            key.span(),
                            &format!("{path}.{}", key.get_ref()),
                            "a value with limits takes `value`, `min` and `max`",
                        );
                        return Some(None);
                    }
                }
                let (Some(v), Some(lo), Some(hi)) = (read("value"), read("min"), read("max"))
                else {
                    self.problem(
                        span,
                        path,
                        "a value with limits needs all of `value`, `min` and `max`",
                    );
                    return Some(None);
                };
                let (Some(v), Some(lo), Some(hi)) = (v, lo, hi) else {
                    return Some(None);
                };
                if !(lo <= v && v <= hi) {
                    self.problem(
                        span,
                        path,
                        format!("needs min <= value <= max, got {lo} <= {v} <= {hi}"),
                    );
                    return Some(None);
                }
                (v, lo, hi)
            }
            _ => return None,
        };
        if !(min.is_finite() && max.is_finite()) {
            self.problem(span, path, "must be a finite number");
            return Some(None);
        }
        let (line, column) = self.place(span.start);
        self.tolerances.push(Tolerance {
            field: path.to_string(),
            nominal,
            min,
            max,
            line,
            column,
        });
        // Limits computed from a percentage may differ from a case's value in the last bit.
        let slack = 1e-12 * min.abs().max(max.abs());
        match self.overrides.get(path) {
            Some(&v) if (min - slack..=max + slack).contains(&v) => Some(Some(v)),
            Some(&v) => {
                self.problem(
                    span,
                    path,
                    format!("the case's value {v} lies outside the tolerance {min} .. {max}"),
                );
                Some(None)
            }
            None => Some(Some(nominal)),
        }
    }

    /// Reads the parameters of `fields` from `entries` into `out`, reporting unknown keys.
    pub(super) fn parameters<'a, 'i: 'a>(
        &mut self,
        entries: impl Iterator<Item = Entry<'a, 'i>>,
        fields: &[Field],
        path: &str,
        what: &str,
        out: &mut HashMap<String, Located>,
        order: &mut Vec<String>,
    ) {
        for (key, value) in entries {
            let name = key.get_ref().as_ref();
            let field_path = format!("{path}.{name}");
            let Some(spec) = fields.iter().find(|f| f.name == name) else {
                let known: Vec<&str> = fields.iter().map(|f| f.name).collect();
                self.problem(
                    key.span(),
                    &field_path,
                    if known.is_empty() {
                        format!("unknown parameter `{name}`: {what} takes no parameters")
                    } else {
                        format!(
                            "unknown parameter `{name}` for {what} (known: {})",
                            known.join(", ")
                        )
                    },
                );
                continue;
            };
            let Some(v) = self.number(value, &field_path, spec.quantity) else {
                continue;
            };
            if spec.quantity == Quantity::Count && (v.fract() != 0.0 || v < 0.0) {
                self.problem(
                    value.span(),
                    &field_path,
                    format!("must be a whole number, got {v}"),
                );
                continue;
            }
            let rule_ok = |v: f64| match spec.rule {
                Rule::Any => true,
                Rule::Positive => v > 0.0,
                Rule::NonNegative => v >= 0.0,
                Rule::Fraction => v > 0.0 && v < 1.0,
            };
            // A tolerance's limits must obey the rule too.
            let limits = self
                .tolerances
                .last()
                .filter(|t| t.field == field_path)
                .map(|t| (t.min, t.max));
            let ok = rule_ok(v) && limits.is_none_or(|(lo, hi)| rule_ok(lo) && rule_ok(hi));
            if !ok {
                let need = match spec.rule {
                    Rule::Positive => "must be positive",
                    Rule::NonNegative => "must not be negative",
                    Rule::Fraction => "must be between 0 and 1 (exclusive)",
                    Rule::Any => "",
                };
                self.problem(value.span(), &field_path, format!("{need}, got {v}"));
                continue;
            }
            if let Some((lo, hi)) = plausible(spec.quantity) {
                if v != 0.0 && !(lo..=hi).contains(&v.abs()) {
                    let unit = spec.quantity.symbol();
                    let message = if spec.quantity == Quantity::Count {
                        format!("{v} is beyond any real part: at most {hi}")
                    } else {
                        format!(
                            "{v:e} {unit} is beyond any real part: the magnitude is allowed from \
                             {lo:e} to {hi:e} {unit}"
                        )
                    };
                    self.problem(value.span(), &field_path, message);
                    continue;
                }
            }
            order.push(name.to_string());
            out.insert(
                name.to_string(),
                Located {
                    value: v,
                    span: value.span(),
                },
            );
        }
    }

    pub(super) fn parameter_set(
        &mut self,
        name: &Spanned<std::borrow::Cow<'_, str>>,
        body: &Spanned<DeValue<'_>>,
    ) -> Option<ParameterSet> {
        let path = format!("parameter_set.{}", name.get_ref());
        let Some(table) = body.get_ref().as_table() else {
            self.problem(body.span(), &path, "must be a table");
            return None;
        };
        let family = match table.get("kind").map(|v| (v.get_ref().as_str(), v.span())) {
            Some((Some(k), span)) => {
                if !set_families().contains(&k) {
                    self.problem(
                        span,
                        &format!("{path}.kind"),
                        format!(
                            "unknown parameter-set kind `{k}` (known: {})",
                            set_families().join(", ")
                        ),
                    );
                    return None;
                }
                k.to_string()
            }
            Some((None, span)) => {
                self.problem(span, &format!("{path}.kind"), "must be a string");
                return None;
            }
            None => {
                self.problem(
                    name.span(),
                    &path,
                    format!("missing `kind` (one of {})", set_families().join(", ")),
                );
                return None;
            }
        };
        let mut values = HashMap::new();
        let mut order = Vec::new();
        self.parameters(
            table.iter().filter(|(k, _)| k.get_ref() != "kind"),
            fields_of(&family),
            &path,
            &format!("a {family} parameter set"),
            &mut values,
            &mut order,
        );
        Some(ParameterSet {
            family,
            values,
            order,
            used_by: Vec::new(),
        })
    }
}

/// The magnitudes a value of each quantity may take (besides 0 where its rule allows it):
/// far beyond real parts on both sides, so that only nonsense is refused (a femtohenry coil
/// or a 1e308 F capacitor would stall the engine or overflow it).
fn plausible(quantity: Quantity) -> Option<(f64, f64)> {
    Some(match quantity {
        Quantity::Voltage => (1e-12, 1e6),
        Quantity::Current => (1e-30, 1e6),
        Quantity::Resistance => (1e-9, 1e18),
        Quantity::Capacitance => (1e-15, 1e4),
        Quantity::Inductance => (1e-12, 1e4),
        Quantity::Frequency => (1e-3, 1e9),
        Quantity::Time => (1e-15, 86_400.0),
        Quantity::Count => (1.0, 100.0),
        _ => return None,
    })
}
