//! The reader of a circuit file: its state, the problems it collects, the document walk and node names.

use super::*;

/// A parameter value read from the file, with where it was written.
#[derive(Clone)]
pub(super) struct Located {
    pub(super) value: f64,
    pub(super) span: Range<usize>,
}

pub(super) struct ParameterSet {
    pub(super) family: String,
    pub(super) values: HashMap<String, Located>,
    pub(super) order: Vec<String>,
    pub(super) used_by: Vec<String>,
}

/// Where a part's pins were written, for topology messages.
pub(super) struct PartOrigin {
    pub(super) name_span: Range<usize>,
    pub(super) pin_spans: Vec<Range<usize>>,
}

pub(super) struct Reader<'t> {
    pub(super) text: &'t str,
    pub(super) problems: Vec<FileProblem>,
    /// Values with a tolerance, as read.
    pub(super) tolerances: Vec<Tolerance>,
    /// Values to use instead of the written ones (a tolerance case), by field.
    pub(super) overrides: &'t HashMap<String, f64>,
}

pub(super) type Entry<'a, 'i> = (
    &'a Spanned<std::borrow::Cow<'i, str>>,
    &'a Spanned<DeValue<'i>>,
);

impl Reader<'_> {
    /// Line and column (from 1, in characters) of byte `offset`.
    pub(super) fn place(&self, offset: usize) -> (usize, usize) {
        let start = offset.min(self.text.len());
        let line_start = self.text[..start].rfind('\n').map_or(0, |i| i + 1);
        let line = self.text[..start].matches('\n').count() + 1;
        (line, self.text[line_start..start].chars().count() + 1)
    }

    pub(super) fn problem(&mut self, span: Range<usize>, field: &str, message: impl Into<String>) {
        let start = span.start.min(self.text.len());
        let line_start = self.text[..start].rfind('\n').map_or(0, |i| i + 1);
        let line_end = self.text[start..]
            .find('\n')
            .map_or(self.text.len(), |i| start + i);
        let (line, column) = self.place(start);
        let end = span.end.clamp(start, line_end);
        let marker_len = self.text[start..end].chars().count().max(1);
        self.problems.push(FileProblem {
            line,
            column,
            field: field.to_string(),
            message: message.into(),
            source_line: self.text[line_start..line_end].trim_end().to_string(),
            marker_len,
        });
    }

    pub(super) fn document(&mut self, doc: &DeTable<'_>) -> Option<Circuit> {
        let mut title = String::new();
        let mut sets: Vec<(String, ParameterSet)> = Vec::new();
        let mut part_tables: Vec<Entry<'_, '_>> = Vec::new();
        for (key, value) in doc {
            match key.get_ref().as_ref() {
                "title" => match value.get_ref().as_str() {
                    Some(s) => title = s.to_string(),
                    None => self.problem(value.span(), "title", "must be a string"),
                },
                "parameter_set" => match value.get_ref().as_table() {
                    Some(table) => {
                        for (name, body) in table {
                            if let Some(set) = self.parameter_set(name, body) {
                                sets.push((name.get_ref().to_string(), set));
                            }
                        }
                    }
                    None => self.problem(
                        value.span(),
                        "parameter_set",
                        "must be a table of named sets: [parameter_set.NAME]",
                    ),
                },
                "part" => match value.get_ref().as_table() {
                    Some(table) => part_tables.extend(table.iter()),
                    None => self.problem(
                        value.span(),
                        "part",
                        "must be a table of named parts: [part.NAME]",
                    ),
                },
                other => self.problem(
                    key.span(),
                    other,
                    "unknown top-level field (expected title, parameter_set or part)",
                ),
            }
        }
        if part_tables.is_empty() && self.problems.is_empty() {
            self.problem(
                0..0,
                "part",
                "the circuit has no parts ([part.NAME] tables)",
            );
            return None;
        }

        let mut nodes: Vec<String> = vec![GROUND.to_string()];
        let mut parts = Vec::new();
        let mut origins = Vec::new();
        for (name, body) in part_tables {
            if let Some((part, origin)) = self.part(name, body, &mut nodes, &mut sets) {
                parts.push(part);
                origins.push(origin);
            }
        }
        if !self.problems.is_empty() {
            return None;
        }
        self.topology(&nodes, &parts, &origins);
        if !self.problems.is_empty() {
            return None;
        }
        let parameter_sets = sets
            .into_iter()
            .map(|(name, set)| ParameterSetInfo {
                name,
                family: set.family,
                values: set
                    .order
                    .iter()
                    .map(|k| (k.clone(), set.values[k].value))
                    .collect(),
                used_by: set.used_by,
            })
            .collect();
        Some(Circuit {
            title,
            nodes,
            parts,
            parameter_sets,
            tolerances: self.tolerances.clone(),
        })
    }

    pub(super) fn node_id(nodes: &mut Vec<String>, name: &str) -> NodeId {
        if let Some(i) = nodes.iter().position(|n| n == name) {
            i
        } else {
            nodes.push(name.to_string());
            nodes.len() - 1
        }
    }

    pub(super) fn node_name(&mut self, item: &Spanned<DeValue<'_>>, path: &str) -> Option<String> {
        match item.get_ref().as_str() {
            Some(s) if !s.trim().is_empty() && !s.chars().any(char::is_whitespace) => {
                Some(s.to_string())
            }
            Some(_) => {
                self.problem(
                    item.span(),
                    path,
                    "a node name must be non-empty and contain no spaces",
                );
                None
            }
            None => {
                self.problem(item.span(), path, "a node name must be a string");
                None
            }
        }
    }
}
