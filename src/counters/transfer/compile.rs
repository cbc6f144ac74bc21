//! The symbolic pass: the set K of boundary states (reachable from an open left end, in
//! the kept sector, closed under T) and the rows of every step of the column.
//!
//! # Method
//!
//! Both halves run the column's steps on the frontier engine ([`crate::counters::frontier`]):
//!
//! 1. **States.** From the empty key, `depth` columns with the checks that reach before the
//!    open end left out, then whole columns until the set no longer grows; each step
//!    carries no payload ([`Keys`]), so it is a merge of sorted streams that keeps one copy
//!    of every key, and only the relabelling at the end of a column needs a sort. A sector
//!    whose every boundary field carries charge is enumerated directly instead
//!    ([`Column::sector_keys`]).
//! 2. **Rows.** From K, every step but the last carries input indices ([`Indices`] in,
//!    [`RowBuilder`] out): for every output state the sorted indices of the states that
//!    lead to it, with reversal pairs when they are kept. The last step relabels its
//!    outputs and looks each up in K; its rows are filled by a counting sort.
//!
//! Large steps run in parallel (pieces of the input, ranges of the output); keys, rows and
//! the order of the inputs within a row do not depend on the number of threads.
//!
//! # Complexity
//!
//! Time O(Σ_t S_t · p_t) per pass over a column (p_t value patterns at step t), plus a
//! sort of the boundary keys per column of the state pass; memory O(Σ_t transitions) for
//! the rows and O(max_t S_t p_t) for the streams.

use std::time::Instant;

use rayon::prelude::*;

use super::StripConfig;
use super::column::Column;
use super::rows::{self, Rows};
use crate::counters::frontier::payload::{Indices, Keys, Payload, RowBuilder};
use crate::counters::frontier::step::Step;
use crate::counters::frontier::{Frontier, Piece, ways};
use crate::error::{Error, Result};

/// States at any step allowed per boundary state when the boundary states are capped (a
/// column step holds up to about four times the boundary states on the shipped lattices).
const PEAK_PER_BOUNDARY: usize = 16;

/// Sorted keys cut into as many pieces as a frontier of their size is split into, each
/// with the payload `make(index of its first key)`.
fn pieces<P: Payload>(keys: Vec<u64>, make: impl Fn(u32) -> P) -> Vec<Piece<P>> {
    let parts = ways(keys.len());
    if parts == 1 {
        return vec![Piece {
            keys,
            payload: make(0),
        }];
    }
    let size = keys.len().div_ceil(parts);
    keys.chunks(size)
        .enumerate()
        .map(|(i, c)| Piece {
            keys: c.to_vec(),
            payload: make((i * size) as u32),
        })
        .collect()
}

/// The union of two sorted sets of keys, sorted.
fn union(a: &[u64], b: &[u64]) -> Vec<u64> {
    let mut out = Vec::with_capacity(a.len() + b.len());
    let (mut i, mut j) = (0, 0);
    while i < a.len() && j < b.len() {
        let (x, y) = (a[i], b[j]);
        out.push(x.min(y));
        i += usize::from(x <= y);
        j += usize::from(y <= x);
    }
    out.extend_from_slice(&a[i..]);
    out.extend_from_slice(&b[j..]);
    out
}

impl Column {
    /// Find the states reachable from an open left end (in the chosen sector), closed
    /// under the column, and compile the index lists of every step.
    pub(super) fn compile(&mut self, config: &StripConfig) -> Result<()> {
        if !self.compile_states(config, usize::MAX)? {
            return Err(Error::Model(format!(
                "no state of a strip {} cells wide has charge {}",
                self.width,
                self.sector.unwrap_or(0)
            )));
        }
        Ok(())
    }

    /// [`Column::compile`]; `false` when the kept sector has no state that can be completed.
    /// More than `max_boundary` boundary states is [`Error::Budget`] too, and so is a step
    /// with more than [`PEAK_PER_BOUNDARY`] times that many states (the pass from the open
    /// end would otherwise build a large space before its size could be refused).
    pub(super) fn compile_states(
        &mut self,
        config: &StripConfig,
        max_boundary: usize,
    ) -> Result<bool> {
        let start = Instant::now();
        let capped;
        let config = if max_boundary < usize::MAX {
            let mut c = config.clone();
            c.max_states = c
                .max_states
                .min(max_boundary.saturating_mul(PEAK_PER_BOUNDARY));
            capped = c;
            &capped
        } else {
            config
        };
        let done = self.compile_keys(config, max_boundary)?;
        self.build_seconds += start.elapsed().as_secs_f64();
        Ok(done)
    }

    /// The body of [`Column::compile_states`].
    fn compile_keys(&mut self, config: &StripConfig, max_boundary: usize) -> Result<bool> {
        let boundary = |n: usize| -> Result<()> {
            if n > max_boundary {
                return Err(Error::Budget {
                    cells: format!("a strip {} cells wide", self.width),
                    detail: format!("{n} boundary states (at most {max_boundary} here)"),
                });
            }
            Ok(())
        };
        let every_field_charged = self.charge.len() as u32 == self.boundary_bits.count_ones();
        let enumerated = self.sector.is_some() && every_field_charged;
        let mut keys = if enumerated {
            // No pass from the open end: the sector is every key of a kept charge that the
            // filters allow (states without a past among them are pruned as transient
            // before iterating).
            let mut keys = Vec::new();
            for q in self.kept_charges() {
                keys.extend(self.sector_keys(q, config, max_boundary)?);
                boundary(keys.len())?;
            }
            keys.sort_unstable();
            keys.dedup();
            keys
        } else {
            let mut keys = vec![0u64];
            for t in 0..self.depth {
                keys = self.column_keys(&keys, Some(t), config)?;
            }
            keys.retain(|&k| self.feasible(k) && self.in_sector(k));
            boundary(keys.len())?;
            keys
        };
        for _ in 0..1000 {
            if enumerated || keys.is_empty() {
                // Closed by construction; the last step's look-up checks every image.
                break;
            }
            let image = self.column_keys(&keys, None, config)?;
            if image.iter().any(|&k| !self.in_sector(k)) {
                return Err(Error::Model(
                    "internal: the charge found from the rule tables is not conserved".into(),
                ));
            }
            let union = union(&keys, &image);
            if union.len() == keys.len() {
                break;
            }
            boundary(union.len())?;
            keys = union;
        }
        if keys.is_empty() && self.sector.is_some() {
            return Ok(false);
        }
        if let Some(m) = self.flip {
            // One representative (the smaller key) of every pair {k, k XOR m}.
            keys.retain(|&k| k < k ^ m);
        }
        self.compile_rows(keys, config)?;
        Ok(true)
    }

    /// Apply a whole column to a sorted set of keys; `column` is the column number from an
    /// open left end (checks reaching before it are skipped), `None` in the steady state,
    /// where keys that cannot lie on a cycle are dropped.
    fn column_keys(
        &self,
        keys: &[u64],
        column: Option<usize>,
        config: &StripConfig,
    ) -> Result<Vec<u64>> {
        let opening: Vec<Step>;
        let steps: Vec<&Step> = match column {
            None => self.steps.iter().map(|s| &s.step).collect(),
            Some(t) => {
                opening = self
                    .steps
                    .iter()
                    .map(|s| s.step.without(|i| s.depths[i] > t))
                    .collect();
                opening.iter().collect()
            }
        };
        let mut frontier = Frontier::new(pieces(keys.to_vec(), |_| Keys));
        let mut next: Vec<Piece<Keys>> = Vec::new();
        for step in steps {
            frontier
                .step(step, false, &mut next)
                .expect("keys carry nothing that overflows");
            std::mem::swap(&mut frontier.pieces, &mut next);
            self.within_budget(frontier.len(), config)?;
        }
        let mut out: Vec<u64> = frontier
            .pieces
            .iter()
            .flat_map(|p| &p.keys)
            .map(|&k| self.relabelled(k))
            .collect();
        if column.is_none() {
            out.retain(|&k| self.feasible(k));
        }
        if out.len() >= crate::counters::frontier::PARALLEL_MIN {
            out.par_sort_unstable();
        } else {
            out.sort_unstable();
        }
        out.dedup();
        Ok(out)
    }

    /// The rows of every step of the column, from the boundary states `keys`.
    fn compile_rows(&mut self, keys: Vec<u64>, config: &StripConfig) -> Result<()> {
        if self.weighting.is_some() {
            return self.compile_weighted_rows(keys, config);
        }
        let mut all_rows = Vec::with_capacity(self.steps.len());
        let mut sizes = Vec::with_capacity(self.steps.len());
        let last = self.steps.len().saturating_sub(1);
        let too_many = |n: usize| Error::Budget {
            cells: format!("a strip {} cells wide", self.width),
            detail: format!("a column step has {n} transitions"),
        };
        let reversal = self.flip.is_some();
        let mut frontier = Frontier::new(pieces(keys.clone(), |first| Indices { first }));
        let mut built: Vec<Piece<RowBuilder>> = Vec::new();
        for (s, column_step) in self.steps.iter().enumerate() {
            let step = &column_step.step;
            let inputs = frontier.len();
            let (rows, outputs) = if s == last {
                let (sources, starts) = self.closing_rows(step, &frontier, &keys, &too_many)?;
                (Rows::from_compressed(&sources, &starts), keys.len())
            } else {
                frontier
                    .step(step, reversal, &mut built)
                    .expect("indices carry nothing that overflows");
                let total: usize = built.iter().map(|p| p.payload.sources.len()).sum();
                if total >= u32::MAX as usize {
                    return Err(too_many(total));
                }
                let outputs = built.iter().map(Piece::len).sum();
                let rows = Rows::from_pieces(
                    built
                        .iter()
                        .map(|p| (&p.payload.sources[..], &p.payload.starts[..])),
                );
                // The outputs are the next step's inputs, numbered piece after piece.
                let mut first = 0u32;
                frontier.pieces = built
                    .iter_mut()
                    .map(|p| {
                        let piece = Piece {
                            keys: std::mem::take(&mut p.keys),
                            payload: Indices { first },
                        };
                        first += piece.len() as u32;
                        piece
                    })
                    .collect();
                (rows, outputs)
            };
            self.within_budget(outputs, config)?;
            if inputs > rows::MAX_INPUT {
                return Err(too_many(inputs));
            }
            all_rows.push(rows);
            sizes.push(outputs);
        }
        self.keys = keys;
        self.rows = all_rows;
        self.sizes = sizes;
        Ok(())
    }

    /// The rows of the last step of a column, which follow the boundary states `keys` (a
    /// state nothing leads to has an empty row): every successor is relabelled and looked
    /// up in `keys`, then a counting sort by that index fills the rows in increasing input
    /// order. As compressed rows (sources, starts).
    fn closing_rows(
        &self,
        step: &Step,
        frontier: &Frontier<Indices>,
        keys: &[u64],
        too_many: &dyn Fn(usize) -> Error,
    ) -> Result<(Vec<u32>, Vec<u32>)> {
        // (index in `keys`, input) per transition, per piece of the input.
        let targets_of = |piece: &Piece<Indices>| -> Result<Vec<(u32, u32)>> {
            let mut targets = Vec::new();
            let mut open = false;
            for (i, &key) in piece.keys.iter().enumerate() {
                let input = piece.payload.item(i);
                step.successors(key, |k| {
                    let out = self.relabelled(step.forget(k));
                    let out = self.flip.map_or(out, |m| out.min(out ^ m));
                    match keys.binary_search(&out) {
                        Ok(j) => targets.push((j as u32, input)),
                        // A state no completion allows has no successor: dropped.
                        Err(_) if !self.feasible(out) => {}
                        Err(_) => open = true,
                    }
                });
                if open {
                    return Err(Error::Model(
                        "internal: the strip's state set is not closed".into(),
                    ));
                }
            }
            Ok(targets)
        };
        let parts: Vec<Vec<(u32, u32)>> = if frontier.pieces.len() > 1 {
            frontier
                .pieces
                .par_iter()
                .map(targets_of)
                .collect::<Result<_>>()?
        } else {
            frontier
                .pieces
                .iter()
                .map(targets_of)
                .collect::<Result<_>>()?
        };
        let total: usize = parts.iter().map(Vec::len).sum();
        if total >= u32::MAX as usize {
            return Err(too_many(total));
        }
        let mut starts = vec![0u32; keys.len() + 1];
        for &(j, _) in parts.iter().flatten() {
            starts[j as usize + 1] += 1;
        }
        for j in 0..keys.len() {
            starts[j + 1] += starts[j];
        }
        let mut fill = starts.clone();
        let mut sources = vec![0u32; total];
        for &(j, i) in parts.iter().flatten() {
            sources[fill[j as usize] as usize] = i;
            fill[j as usize] += 1;
        }
        Ok((sources, starts))
    }
}
