//! The compiled rows of one column step: for every output state, the indices of the input
//! states that lead to it, stored without a separate table of row starts.
//!
//! # Layout
//!
//! The rows follow each other in one `u32` array. An entry holds an input index in its low
//! 31 bits; the last entry of a row has the top bit set. A row without inputs is the single
//! entry [`EMPTY`]. The position of the first entry of every [`CHUNK`]-th row is kept, so
//! that a block of rows can be summed on its own (in parallel) and trace passes can start
//! anywhere a chunk starts. Compared with compressed rows plus a start per row this saves
//! one `u32` per output state, a third of the memory of a typical step.
//!
//! # Complexity
//!
//! Building: linear in the entries. Summing a block: one read per entry; the order of the
//! inputs within a row is the order given, so sums do not depend on the thread count.

/// The top bit: the last entry of a row.
const END: u32 = 1 << 31;

/// A row without inputs.
const EMPTY: u32 = u32::MAX;

/// Rows per independently summed block.
pub const CHUNK: usize = 1 << 12;

/// Largest input index the layout can hold.
pub const MAX_INPUT: usize = (END - 1) as usize;

/// The rows of one step.
#[derive(Debug, Default)]
pub struct Rows {
    entries: Vec<u32>,
    /// Weighted rows ([`super::weighted`]): per entry, the index of the value pattern the
    /// transition adds (its factor is looked up per application); empty when unweighted.
    patterns: Vec<u8>,
    /// Entry position of the first entry of rows 0, CHUNK, 2·CHUNK, …
    chunks: Vec<usize>,
    outputs: usize,
    transitions: usize,
}

impl Rows {
    /// From compressed rows: output j reads `sources[starts[j]..starts[j + 1]]`.
    pub fn from_compressed(sources: &[u32], starts: &[u32]) -> Rows {
        let outputs = starts.len().saturating_sub(1);
        Rows::from_rows(
            (0..outputs).map(|j| &sources[starts[j] as usize..starts[j + 1] as usize]),
            outputs,
            sources.len(),
        )
    }

    /// Weighted compressed rows: `patterns[e]` is the value pattern of entry `e`.
    pub fn from_compressed_weighted(sources: &[u32], patterns: &[u8], starts: &[u32]) -> Rows {
        let outputs = starts.len().saturating_sub(1);
        let mut rows = Rows::from_compressed(sources, starts);
        rows.patterns = weighted_patterns(
            (0..outputs).map(|j| &patterns[starts[j] as usize..starts[j + 1] as usize]),
            rows.entries.len(),
        );
        rows
    }

    /// [`Rows::from_pieces`] with a value pattern per entry: each piece is (sources,
    /// patterns, starts).
    pub fn from_pieces_weighted<'a>(
        pieces: impl Iterator<Item = (&'a [u32], &'a [u8], &'a [u32])> + Clone,
    ) -> Rows {
        let mut rows = Rows::from_pieces(pieces.clone().map(|p| (p.0, p.2)));
        let each = pieces.flat_map(|(_, patterns, starts)| {
            (0..starts.len()).map(move |j| {
                let end = starts.get(j + 1).map_or(patterns.len(), |&e| e as usize);
                &patterns[starts[j] as usize..end]
            })
        });
        rows.patterns = weighted_patterns(each, rows.entries.len());
        rows
    }

    /// Whether the entries carry value patterns (a weighted operator).
    pub fn is_weighted(&self) -> bool {
        !self.patterns.is_empty()
    }

    /// out[k] = Σ factors[pattern] · input over the row `first + k` (a weighted operator);
    /// `first` is a multiple of [`CHUNK`].
    #[inline]
    pub fn gather_weighted(&self, first: usize, out: &mut [f64], input: &[f64], factors: &[f64]) {
        debug_assert_eq!(first % CHUNK, 0);
        if out.is_empty() {
            return;
        }
        let mut p = self.chunks[first / CHUNK];
        for o in out.iter_mut() {
            let mut acc = 0.0;
            loop {
                let e = self.entries[p];
                if e != EMPTY {
                    acc += factors[self.patterns[p] as usize] * input[(e & !END) as usize];
                }
                p += 1;
                if e & END != 0 {
                    break;
                }
            }
            *o = acc;
        }
    }

    /// From compressed rows in pieces, one after the other: each piece is (sources, starts)
    /// with one start per row, the row ending where the next starts (the last at the end of
    /// the sources).
    pub fn from_pieces<'a>(pieces: impl Iterator<Item = (&'a [u32], &'a [u32])> + Clone) -> Rows {
        let outputs = pieces.clone().map(|p| p.1.len()).sum();
        let transitions = pieces.clone().map(|p| p.0.len()).sum();
        let rows = pieces.flat_map(|(sources, starts)| {
            (0..starts.len()).map(move |j| {
                let end = starts.get(j + 1).map_or(sources.len(), |&e| e as usize);
                &sources[starts[j] as usize..end]
            })
        });
        Rows::from_rows(rows, outputs, transitions)
    }

    /// From the rows in order.
    fn from_rows<'a>(
        rows: impl Iterator<Item = &'a [u32]>,
        outputs: usize,
        transitions: usize,
    ) -> Rows {
        let mut entries = Vec::with_capacity(transitions + outputs / 8);
        let mut chunks = Vec::with_capacity(outputs / CHUNK + 1);
        for (j, row) in rows.enumerate() {
            if j % CHUNK == 0 {
                chunks.push(entries.len());
            }
            match row.split_last() {
                None => entries.push(EMPTY),
                Some((&last, rest)) => {
                    entries.extend_from_slice(rest);
                    entries.push(last | END);
                }
            }
        }
        entries.shrink_to_fit();
        Rows {
            entries,
            patterns: Vec::new(),
            chunks,
            outputs,
            transitions,
        }
    }

    /// Number of output states.
    pub fn outputs(&self) -> usize {
        self.outputs
    }

    /// Number of (input, output) pairs.
    pub fn transitions(&self) -> usize {
        self.transitions
    }

    /// out[k] = Σ input over the row `first + k`; `first` is a multiple of [`CHUNK`].
    #[inline]
    pub fn gather(&self, first: usize, out: &mut [f64], input: &[f64]) {
        debug_assert_eq!(first % CHUNK, 0);
        if out.is_empty() {
            return;
        }
        let mut p = self.chunks[first / CHUNK];
        for o in out.iter_mut() {
            let mut acc = 0.0;
            loop {
                let e = self.entries[p];
                p += 1;
                if e != EMPTY {
                    acc += input[(e & !END) as usize];
                }
                if e & END != 0 {
                    break;
                }
            }
            *o = acc;
        }
    }

    /// Call `f(j, inputs of row j)` for every row in order (for exact passes).
    pub fn for_each_row(&self, mut f: impl FnMut(usize, &mut dyn Iterator<Item = usize>)) {
        let mut p = 0;
        for j in 0..self.outputs {
            let start = p;
            while self.entries[p] & END == 0 {
                p += 1;
            }
            p += 1;
            let mut inputs = self.entries[start..p]
                .iter()
                .filter(|&&e| e != EMPTY)
                .map(|&e| (e & !END) as usize);
            f(j, &mut inputs);
        }
    }
}

/// The patterns of rows laid out like their entries (an empty row holds one entry, whose
/// pattern is never read).
fn weighted_patterns<'a>(rows: impl Iterator<Item = &'a [u8]>, entries: usize) -> Vec<u8> {
    let mut out = Vec::with_capacity(entries);
    for row in rows {
        if row.is_empty() {
            out.push(0);
        } else {
            out.extend_from_slice(row);
        }
    }
    debug_assert_eq!(out.len(), entries);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_sum_what_the_compressed_form_says() {
        // Rows: {0, 2}, {}, {1}, {0, 1, 2}.
        let sources = [0u32, 2, 1, 0, 1, 2];
        let starts = [0u32, 2, 2, 3, 6];
        let rows = Rows::from_compressed(&sources, &starts);
        assert_eq!((rows.outputs(), rows.transitions()), (4, 6));
        let mut out = vec![0.0; 4];
        rows.gather(0, &mut out, &[1.0, 10.0, 100.0]);
        assert_eq!(out, vec![101.0, 0.0, 10.0, 111.0]);
        // The same rows in two pieces.
        let pieces = Rows::from_pieces(
            [
                (&[0u32, 2, 1][..], &[0u32, 2, 2][..]),
                (&[0u32, 1, 2][..], &[0u32][..]),
            ]
            .into_iter(),
        );
        let mut again = vec![0.0; 4];
        pieces.gather(0, &mut again, &[1.0, 10.0, 100.0]);
        assert_eq!(again, out);
        // A step without outputs (a sector nothing reaches) sums nothing.
        Rows::from_compressed(&[], &[0]).gather(0, &mut [], &[]);
        let mut seen = Vec::new();
        rows.for_each_row(|j, inputs| seen.push((j, inputs.collect::<Vec<_>>())));
        assert_eq!(
            seen,
            vec![
                (0, vec![0, 2]),
                (1, vec![]),
                (2, vec![1]),
                (3, vec![0, 1, 2])
            ]
        );
    }
}
