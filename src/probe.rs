//! Probes and traces: which quantities a run records, and writing them out.
//!
//! A probe is a node voltage or a part current. A [`Trace`] is an [`Observer`] that keeps
//! the probed values at every accepted step (and the discrete events), and renders them as
//! CSV into any writer.

use std::io::{self, Write};

use crate::circuit::{Circuit, PartSpec};
use crate::engine::{DiscreteEvent, Network, Observer, SimState};

/// A recorded quantity.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Probe {
    /// Voltage of a node against `gnd`, volts.
    Voltage {
        /// Node index.
        node: usize,
    },
    /// Current into the first pin of a part, amperes.
    Current {
        /// Part index.
        part: usize,
    },
}

/// Why a probe name was not understood.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
pub enum ProbeError {
    /// No node of that name.
    #[error("no node named `{name}` (nodes: {known})")]
    UnknownNode {
        /// The name asked for.
        name: String,
        /// The circuit's nodes.
        known: String,
    },
    /// No part of that name.
    #[error("no part named `{name}` (parts: {known})")]
    UnknownPart {
        /// The name asked for.
        name: String,
        /// The circuit's parts.
        known: String,
    },
}

impl Probe {
    /// Reads `NODE` (a node voltage) or `current:PART` (a part's current).
    pub fn parse(text: &str, circuit: &Circuit) -> Result<Probe, ProbeError> {
        if let Some(part) = text.strip_prefix("current:") {
            circuit
                .part(part)
                .map(|part| Probe::Current { part })
                .ok_or_else(|| ProbeError::UnknownPart {
                    name: part.to_string(),
                    known: circuit
                        .parts
                        .iter()
                        .map(|p| p.name.as_str())
                        .collect::<Vec<_>>()
                        .join(", "),
                })
        } else {
            let name = text.strip_prefix("voltage:").unwrap_or(text);
            circuit
                .node(name)
                .map(|node| Probe::Voltage { node })
                .ok_or_else(|| ProbeError::UnknownNode {
                    name: name.to_string(),
                    known: circuit.nodes.join(", "),
                })
        }
    }

    /// Column name in traces: `NODE_V` or `PART_A`.
    pub fn label(&self, circuit: &Circuit) -> String {
        match self {
            Probe::Voltage { node } => format!("{}_V", circuit.nodes[*node]),
            Probe::Current { part } => format!("{}_A", circuit.parts[*part].name),
        }
    }

    /// The probed value at a state.
    pub fn value(&self, network: &Network, state: &SimState) -> f64 {
        match self {
            Probe::Voltage { node } => state.node_voltage(*node),
            Probe::Current { part } => network.part_current(state, *part),
        }
    }

    /// Every node voltage, plus the currents of sources, inductors and transformers.
    pub fn defaults(circuit: &Circuit) -> Vec<Probe> {
        let mut probes: Vec<Probe> = (1..circuit.nodes.len())
            .map(|node| Probe::Voltage { node })
            .collect();
        for (part, p) in circuit.parts.iter().enumerate() {
            if matches!(
                p.spec,
                PartSpec::VoltageSource(_)
                    | PartSpec::Inductor { .. }
                    | PartSpec::Transformer(_)
                    | PartSpec::Switch(_)
            ) {
                probes.push(Probe::Current { part });
            }
        }
        probes
    }
}

/// Recorded probe values at each accepted step, and the discrete events.
#[derive(Clone, Debug, Default)]
pub struct Trace {
    /// What each column holds.
    pub probes: Vec<Probe>,
    /// Times of the rows, seconds.
    pub time: Vec<f64>,
    /// One column per probe.
    pub columns: Vec<Vec<f64>>,
    /// Discrete events in time order.
    pub events: Vec<DiscreteEvent>,
    /// Rows closer together than this are skipped (0 keeps every step), seconds.
    pub min_interval_s: f64,
    /// Whole cycles skipped in a periodic steady state, in time order: the recorded rows
    /// stop at a skip and resume after it; [`Trace::rows`] fills the gap with the repeated
    /// cycle.
    pub skips: Vec<Skip>,
    /// Keep only the rows of about the last this many seconds (`None` keeps every row):
    /// a long run whose report needs only its end then holds bounded memory. Events are
    /// all kept.
    pub keep_last_s: Option<f64>,
}

/// A row of [`Trace::filled_rows`]: its time, the recorded row whose values it carries,
/// and, inside a skip, the skip's index and which of its cycles (from 1) it belongs to.
type FilledRow = (f64, usize, Option<(usize, usize)>);

/// Rows a trace with [`Trace::keep_last_s`] holds before it drops old ones.
const KEEP_SLACK_ROWS: usize = 4096;

/// Whole cycles a run skipped in a periodic steady state: the cycle that ended at `at_s`
/// repeats `cycles` times.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Skip {
    /// The end of the last simulated cycle before the skip, seconds.
    pub at_s: f64,
    /// The cycle's length, seconds.
    pub period_s: f64,
    /// How many whole cycles were skipped.
    pub cycles: usize,
    /// An envelope step, not a repeat: the skipped cycles drift from the cycle before the
    /// skip toward the one after it.
    pub drift: bool,
}

impl Trace {
    /// An empty trace of `probes`.
    pub fn new(probes: Vec<Probe>) -> Self {
        let columns = vec![Vec::new(); probes.len()];
        Self {
            probes,
            columns,
            ..Self::default()
        }
    }

    /// Appends the probed values at `state` as a row.
    pub fn record(&mut self, network: &Network, state: &SimState) {
        if let Some(&last) = self.time.last() {
            if state.time - last < self.min_interval_s {
                return;
            }
        }
        self.time.push(state.time);
        for (probe, column) in self.probes.iter().zip(&mut self.columns) {
            column.push(probe.value(network, state));
        }
        if let Some(keep) = self.keep_last_s {
            self.drop_before(state.time - keep);
        }
    }

    /// Drops the rows before `t` once enough have gathered (amortised: a drop happens
    /// only when the old rows outnumber the slack). Skips before `t` go too.
    fn drop_before(&mut self, t: f64) {
        if self.time.len() < 2 * KEEP_SLACK_ROWS {
            return;
        }
        let old = self.time.partition_point(|&x| x < t);
        if old < KEEP_SLACK_ROWS {
            return;
        }
        self.time.drain(..old);
        for column in &mut self.columns {
            column.drain(..old);
        }
        self.skips.retain(|s| s.at_s >= t);
    }

    /// Notes that `cycles` whole cycles of length `period_s` were skipped at `at_s` (the
    /// last recorded cycle repeats over them).
    pub fn note_skip(&mut self, at_s: f64, period_s: f64, cycles: usize) {
        self.push_skip(at_s, period_s, cycles, false);
    }

    /// Notes that an envelope step jumped `cycles` whole cycles of length `period_s` at
    /// `at_s`: the last recorded cycle fills them, shifted step by step toward the cycle
    /// simulated after the jump (see [`Skip::drift`]).
    pub fn note_jump(&mut self, at_s: f64, period_s: f64, cycles: usize) {
        self.push_skip(at_s, period_s, cycles, true);
    }

    fn push_skip(&mut self, at_s: f64, period_s: f64, cycles: usize, drift: bool) {
        if cycles > 0 {
            self.skips.push(Skip {
                at_s,
                period_s,
                cycles,
                drift,
            });
        }
    }

    /// Every row in time order, the skipped cycles included: (time, index of the recorded
    /// row whose values it carries). A skipped cycle repeats the rows of the cycle before
    /// the skip, shifted by whole periods.
    pub fn rows(&self) -> Vec<(f64, usize)> {
        self.filled_rows().into_iter().map(|r| (r.0, r.1)).collect()
    }

    /// [`Trace::rows`] with, for a row inside a skip, the skip's index and which of its
    /// cycles (from 1) the row belongs to.
    fn filled_rows(&self) -> Vec<FilledRow> {
        let mut out = Vec::with_capacity(self.time.len());
        let mut skips = self.skips.iter().enumerate().peekable();
        for (row, &t) in self.time.iter().enumerate() {
            while let Some((index, skip)) = skips.next_if(|s| s.1.at_s < t) {
                self.repeat(index, skip, &mut out);
            }
            out.push((t, row, None));
        }
        for (index, skip) in skips {
            self.repeat(index, skip, &mut out);
        }
        out
    }

    fn repeat(&self, index: usize, skip: &Skip, out: &mut Vec<FilledRow>) {
        let from = self
            .time
            .partition_point(|&t| t <= skip.at_s - skip.period_s + 1e-12);
        let to = self.time.partition_point(|&t| t <= skip.at_s + 1e-12);
        for k in 1..=skip.cycles {
            let shift = k as f64 * skip.period_s;
            out.extend((from..to).map(|row| (self.time[row] + shift, row, Some((index, k)))));
        }
    }

    /// Each column's change across a drifting skip: from the last row before it to the
    /// first row one cycle after it (zero for a plain repeat, or when no row follows).
    fn skip_drift(&self, skip: &Skip) -> Vec<f64> {
        let before = self.time.partition_point(|&t| t <= skip.at_s + 1e-12);
        let after_s = skip.at_s + (skip.cycles as f64 + 1.0) * skip.period_s - 1e-12;
        let after = self.time.partition_point(|&t| t < after_s);
        if !skip.drift || before == 0 || after >= self.time.len() {
            return vec![0.0; self.columns.len()];
        }
        self.columns
            .iter()
            .map(|c| c[after] - c[before - 1])
            .collect()
    }

    /// A copy with the skipped cycles filled in (see [`Trace::rows`]; a drifting skip's
    /// cycles move in equal parts from the cycle before it toward the cycle after it) and
    /// no skips left.
    pub fn expanded(&self) -> Trace {
        if self.skips.is_empty() {
            return self.clone();
        }
        let drifts: Vec<Vec<f64>> = self.skips.iter().map(|s| self.skip_drift(s)).collect();
        let rows = self.filled_rows();
        let value = |column: usize, &(_, row, skip): &FilledRow| {
            let v = self.columns[column][row];
            match skip {
                Some((index, k)) => {
                    let share = k as f64 / (self.skips[index].cycles as f64 + 1.0);
                    v + drifts[index][column] * share
                }
                None => v,
            }
        };
        Trace {
            probes: self.probes.clone(),
            time: rows.iter().map(|r| r.0).collect(),
            columns: (0..self.columns.len())
                .map(|c| rows.iter().map(|r| value(c, r)).collect())
                .collect(),
            events: self.events.clone(),
            min_interval_s: self.min_interval_s,
            skips: Vec::new(),
            keep_last_s: self.keep_last_s,
        }
    }

    /// Index of the probe's column, if recorded.
    pub fn column(&self, probe: &Probe) -> Option<&[f64]> {
        self.probes
            .iter()
            .position(|p| p == probe)
            .map(|i| self.columns[i].as_slice())
    }

    /// Writes the trace as CSV: `time_s` then one column per probe. Skipped cycles are
    /// written filled in (see [`Trace::expanded`]), so the file has no hole.
    pub fn write_csv<W: Write>(&self, circuit: &Circuit, mut out: W) -> io::Result<()> {
        write!(out, "time_s")?;
        for p in &self.probes {
            write!(out, ",{}", p.label(circuit))?;
        }
        writeln!(out)?;
        let filled;
        let trace = if self.skips.is_empty() {
            self
        } else {
            filled = self.expanded();
            &filled
        };
        for (row, t) in trace.time.iter().enumerate() {
            write!(out, "{t:.9e}")?;
            for column in &trace.columns {
                write!(out, ",{:.9e}", column[row])?;
            }
            writeln!(out)?;
        }
        Ok(())
    }
}

impl Observer for Trace {
    fn step(&mut self, network: &Network, state: &SimState) {
        self.record(network, state);
    }

    fn event(&mut self, _network: &Network, event: &DiscreteEvent) {
        self.events.push(*event);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_trace_that_keeps_its_end_holds_bounded_rows() {
        let mut trace = Trace::new(vec![Probe::Voltage { node: 1 }]);
        trace.keep_last_s = Some(0.02);
        for k in 0..1_000_000 {
            let t = f64::from(k) * 1e-5;
            trace.time.push(t);
            trace.columns[0].push(t);
            trace.drop_before(t - 0.02);
        }
        // 10 s recorded at 10 us: only the last 20 ms (2000 rows) and the slack remain.
        assert!(
            trace.time.len() <= 2000 + 2 * KEEP_SLACK_ROWS,
            "{}",
            trace.time.len()
        );
        let last = *trace.time.last().unwrap();
        assert!(trace.time[0] <= last - 0.02);
        assert_eq!(trace.columns[0].len(), trace.time.len());
        assert_eq!(trace.columns[0][0], trace.time[0]);
    }

    #[test]
    fn a_jump_is_filled_in_equal_parts_between_the_cycles_around_it() {
        // A value that rises by 1 per cycle, recorded for one cycle (t = 0..1), then jumped
        // for 3 cycles and recorded again for the cycle after the jump (t = 4..5, value
        // 4..5): the jumped cycles carry 1..2, 2..3 and 3..4.
        let mut trace = Trace::new(vec![Probe::Voltage { node: 1 }]);
        for k in 0..=4 {
            let t = f64::from(k) * 0.25;
            trace.time.push(t);
            trace.columns[0].push(t);
        }
        trace.note_jump(1.0, 1.0, 3);
        for k in 1..=4 {
            let t = 4.0 + f64::from(k) * 0.25;
            trace.time.push(t);
            trace.columns[0].push(t);
        }
        let full = trace.expanded();
        for (t, v) in full.time.iter().zip(&full.columns[0]) {
            assert!((t - v).abs() < 1e-12, "at {t}: {v}");
        }
        // A plain skip repeats the cycle instead.
        let mut repeat = trace.clone();
        repeat.skips[0].drift = false;
        let filled = repeat.expanded();
        let at_2_5 = filled
            .time
            .iter()
            .position(|&t| (t - 2.5).abs() < 1e-9)
            .unwrap();
        assert!((filled.columns[0][at_2_5] - 0.5).abs() < 1e-12);
    }
}
