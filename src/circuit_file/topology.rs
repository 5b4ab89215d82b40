//! Topology checks: lone nodes, floating groups, loops of sources and inductors.

use super::*;

/// Pin pairs of a part that conduct to each other at DC or through its own element. A
/// current source does not: it sets a current, not a voltage, so nodes joined to the rest
/// only through current sources have no defined voltage.
pub(super) fn conductive_pairs(spec: &PartSpec) -> Vec<(usize, usize)> {
    match spec {
        PartSpec::CurrentSource(_) => Vec::new(),
        PartSpec::Transformer(_) => vec![(0, 1), (2, 3)],
        PartSpec::Bridge(_) => vec![(0, 2), (1, 2), (0, 3)],
        PartSpec::Switch(_) => vec![(0, 1), (2, 3)],
        // Inputs draw no current; the output is driven from ground, the supply pins conduct.
        PartSpec::Comparator(_) => vec![(2, 4), (3, 4)],
        PartSpec::Mosfet(_) | PartSpec::Bipolar(_) => vec![(0, 2), (1, 2)],
        PartSpec::Regulator(_) => vec![(0, 2), (1, 2)],
        PartSpec::Relay(r) if r.normally_closed_connected => vec![(0, 1), (2, 3), (2, 4)],
        PartSpec::Relay(_) => vec![(0, 1), (2, 3)],
        PartSpec::Timer(_) => vec![(0, 1), (5, 1), (6, 1), (2, 1), (3, 1), (4, 1)],
        _ => vec![(0, 1)],
    }
}

/// Branches that fix a voltage or are ideal inductors (no resistance).
pub(super) fn stiff_branches(spec: &PartSpec) -> Vec<(usize, usize)> {
    match spec {
        PartSpec::VoltageSource(_) => vec![(0, 1)],
        PartSpec::Relay(_) => Vec::new(),
        PartSpec::Inductor {
            series_resistance, ..
        } if *series_resistance == 0.0 => vec![(0, 1)],
        PartSpec::Transformer(t) => {
            let mut v = Vec::new();
            if t.primary_resistance == 0.0 {
                v.push((0, 1));
            }
            if t.secondary_resistance == 0.0 {
                v.push((2, 3));
            }
            v
        }
        _ => Vec::new(),
    }
}

/// Part indices along the path from `a` to `b` in a forest of (node, node, part) edges.
pub(super) fn path_between(edges: &[(usize, usize, usize)], a: usize, b: usize) -> Vec<usize> {
    let mut previous: HashMap<usize, (usize, usize)> = HashMap::new();
    let mut queue = std::collections::VecDeque::from([a]);
    let mut seen = vec![a];
    while let Some(n) = queue.pop_front() {
        if n == b {
            break;
        }
        for &(x, y, part) in edges {
            let next = if x == n {
                y
            } else if y == n {
                x
            } else {
                continue;
            };
            if !seen.contains(&next) {
                seen.push(next);
                previous.insert(next, (n, part));
                queue.push_back(next);
            }
        }
    }
    let mut path = Vec::new();
    let mut at = b;
    while let Some(&(from, part)) = previous.get(&at) {
        path.push(part);
        at = from;
    }
    path.reverse();
    path
}

pub(super) struct UnionFind {
    parent: Vec<usize>,
}

impl UnionFind {
    fn new(n: usize) -> Self {
        Self {
            parent: (0..n).collect(),
        }
    }
    fn find(&mut self, mut x: usize) -> usize {
        while self.parent[x] != x {
            self.parent[x] = self.parent[self.parent[x]];
            x = self.parent[x];
        }
        x
    }
    fn union(&mut self, a: usize, b: usize) {
        let (ra, rb) = (self.find(a), self.find(b));
        if ra != rb {
            // Keep gnd (0) as a root so its group is easy to find.
            if ra < rb {
                self.parent[rb] = ra;
            } else {
                self.parent[ra] = rb;
            }
        }
    }
}

impl Reader<'_> {
    /// Connection checks: lone nodes, floating groups, source/inductor loops.
    pub(super) fn topology(&mut self, nodes: &[String], parts: &[Part], origins: &[PartOrigin]) {
        // Pins that conduct to one another inside a part (for floating-group search), and
        // pins whose node counts as connected.
        let mut connections: Vec<Vec<(usize, usize)>> = vec![Vec::new(); nodes.len()];
        for (pi, part) in parts.iter().enumerate() {
            for (k, &node) in part.pins.iter().enumerate() {
                connections[node].push((pi, k));
            }
        }
        for (node, list) in connections.iter().enumerate().skip(1) {
            if list.len() == 1 {
                let (pi, k) = list[0];
                let part = &parts[pi];
                self.problem(
                    origins[pi].pin_spans[k].clone(),
                    &format!("part.{}.pins.{}", part.name, pin_names(part.spec.kind_name())[k]),
                    format!(
                        "node `{}` has only one connection (pin {} of `{}`); connect it to something else or remove it",
                        nodes[node], pin_names(part.spec.kind_name())[k], part.name
                    ),
                );
            }
        }

        // Floating groups: union the pins that conduct to one another.
        let mut groups = UnionFind::new(nodes.len());
        for part in parts {
            for (x, y) in conductive_pairs(&part.spec) {
                groups.union(part.pins[x], part.pins[y]);
            }
        }
        let mut floating: HashMap<usize, Vec<usize>> = HashMap::new();
        for node in 1..nodes.len() {
            let root = groups.find(node);
            if root != groups.find(0) {
                floating.entry(root).or_default().push(node);
            }
        }
        let mut floating: Vec<Vec<usize>> = floating.into_values().collect();
        floating.sort();
        for group in floating {
            let names: Vec<&str> = group.iter().map(|&n| nodes[n].as_str()).collect();
            let (pi, k) = connections[group[0]][0];
            self.problem(
                origins[pi].pin_spans[k].clone(),
                &format!("part.{}.pins", parts[pi].name),
                format!(
                    "no path to gnd from node{} {} (a floating group: give it a connection to gnd, e.g. through a resistor; a current source is no connection, it sets a current and leaves the voltage free)",
                    if names.len() > 1 { "s" } else { "" },
                    names.join(", ")
                ),
            );
        }

        self.current_source_cut_sets(nodes, parts, origins);

        // Loops of voltage sources and resistance-free inductive branches.
        let mut stiff = UnionFind::new(nodes.len());
        let mut edges: Vec<(usize, usize, usize)> = Vec::new();
        for (pi, part) in parts.iter().enumerate() {
            for (x, y) in stiff_branches(&part.spec) {
                let (a, b) = (part.pins[x], part.pins[y]);
                if stiff.find(a) == stiff.find(b) {
                    let mut loop_parts = path_between(&edges, a, b)
                        .into_iter()
                        .map(|e| parts[e].name.clone())
                        .collect::<Vec<_>>();
                    loop_parts.push(part.name.clone());
                    loop_parts.dedup();
                    self.problem(
                        origins[pi].name_span.clone(),
                        &format!("part.{}", part.name),
                        format!(
                            "loop of voltage sources and resistance-free inductors: {} (add a series resistance)",
                            loop_parts.join(" -> ")
                        ),
                    );
                } else {
                    stiff.union(a, b);
                    edges.push((a, b, pi));
                }
            }
        }
    }
}

impl Reader<'_> {
    /// Groups of nodes joined to the rest of the circuit only through current sources and
    /// inductors (with at least one current source): the source forces the inductors'
    /// currents, which the circuit cannot then set from their own states (the dual of a loop
    /// of voltage sources and inductors).
    fn current_source_cut_sets(
        &mut self,
        nodes: &[String],
        parts: &[Part],
        origins: &[PartOrigin],
    ) {
        let inductive =
            |spec: &PartSpec| matches!(spec, PartSpec::Inductor { .. } | PartSpec::Transformer(_));
        let mut groups = UnionFind::new(nodes.len());
        for part in parts.iter().filter(|p| !inductive(&p.spec)) {
            for (x, y) in conductive_pairs(&part.spec) {
                groups.union(part.pins[x], part.pins[y]);
            }
        }
        let ground = groups.find(0);
        let mut reported: Vec<usize> = Vec::new();
        for (pi, part) in parts.iter().enumerate() {
            if !matches!(part.spec, PartSpec::CurrentSource(_)) {
                continue;
            }
            for &pin in &part.pins {
                let root = groups.find(pin);
                if root == ground || reported.contains(&root) {
                    continue;
                }
                // The parts crossing the group's boundary.
                let crossing: Vec<&Part> = parts
                    .iter()
                    .filter(|p| {
                        let inside = p.pins.iter().filter(|&&n| groups.find(n) == root).count();
                        inside > 0 && inside < p.pins.len()
                    })
                    .collect();
                let only_sources_and_coils = crossing
                    .iter()
                    .all(|p| matches!(p.spec, PartSpec::CurrentSource(_)) || inductive(&p.spec));
                if !only_sources_and_coils || !crossing.iter().any(|p| inductive(&p.spec)) {
                    continue;
                }
                reported.push(root);
                let group: Vec<&str> = (1..nodes.len())
                    .filter(|&n| groups.find(n) == root)
                    .map(|n| nodes[n].as_str())
                    .collect();
                let names: Vec<&str> = crossing.iter().map(|p| p.name.as_str()).collect();
                self.problem(
                    origins[pi].name_span.clone(),
                    &format!("part.{}", part.name),
                    format!(
                        "{} {} the rest of the circuit only through current sources and \
                         inductors ({}): the source forces the inductor currents; add a resistor \
                         across the current source or from the node to gnd",
                        if group.len() > 1 { "nodes" } else { "node" },
                        group.join(", ") + if group.len() > 1 { " meet" } else { " meets" },
                        names.join(", ")
                    ),
                );
            }
        }
    }
}
