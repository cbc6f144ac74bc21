//! The merge of sorted streams that ends a step: equal keys become one key, their items
//! go to an [`Accumulator`].
//!
//! # Method
//!
//! Each stream may be spread over several pieces of the frontier (one per piece, covering
//! increasing key ranges, so that a stream read piece after piece is still sorted); a
//! [`Cursor`] reads it across them. The merge repeatedly takes the smallest head over the
//! streams — a linear scan, since a step has only a few streams — and hands the items of
//! every stream at that key to the accumulator in stream order. Keys never reach
//! `u64::MAX` (keys use at most 63 bits), which marks an exhausted stream.
//!
//! For large frontiers the output key space is split at sampled quantiles into ranges
//! that are merged independently (in parallel); each range becomes one piece of the next
//! frontier.

use super::payload::{Accumulator, Overflow};

/// A stream read across several sorted slices whose key ranges follow one another.
pub(crate) struct Cursor<'a, I> {
    slices: Vec<(&'a [u64], &'a [I])>,
    i: usize,
    j: usize,
}

impl<'a, I> Cursor<'a, I> {
    /// A cursor over the non-empty slices, in order.
    pub fn new(slices: Vec<(&'a [u64], &'a [I])>) -> Self {
        Cursor { slices, i: 0, j: 0 }
    }

    /// Whether nothing is left to read.
    pub fn is_empty(&self) -> bool {
        self.i >= self.slices.len()
    }

    #[inline]
    fn head(&self) -> u64 {
        self.slices.get(self.i).map_or(u64::MAX, |s| s.0[self.j])
    }

    #[inline]
    fn item(&self) -> &I {
        &self.slices[self.i].1[self.j]
    }

    #[inline]
    fn advance(&mut self) {
        self.j += 1;
        if self.j == self.slices[self.i].0.len() {
            self.i += 1;
            self.j = 0;
        }
    }
}

/// Merge sorted streams into `keys` and `acc`.
pub(crate) fn merge<I, A: Accumulator<I>>(
    mut cursors: Vec<Cursor<I>>,
    keys: &mut Vec<u64>,
    acc: &mut A,
) -> Result<(), Overflow> {
    cursors.retain(|c| !c.is_empty());
    let mut heads: Vec<u64> = cursors.iter().map(|c| c.head()).collect();
    loop {
        let m = heads.iter().copied().min().unwrap_or(u64::MAX);
        if m == u64::MAX {
            return Ok(());
        }
        let mut first = true;
        for (h, c) in heads.iter_mut().zip(cursors.iter_mut()) {
            if *h == m {
                if first {
                    acc.first(c.item())?;
                    first = false;
                } else {
                    acc.again(c.item())?;
                }
                c.advance();
                *h = c.head();
            }
        }
        keys.push(m);
    }
}

/// Keys that split the union of sorted runs into `ways` ranges of similar size (sampled:
/// 16 keys per run), in increasing order without repeats.
pub(crate) fn splitters<'a>(runs: impl Iterator<Item = &'a [u64]>, ways: usize) -> Vec<u64> {
    let mut sample = Vec::new();
    for run in runs {
        let len = run.len();
        for k in 0..16.min(len) {
            sample.push(run[k * len / 16.min(len)]);
        }
    }
    if sample.is_empty() || ways < 2 {
        return Vec::new();
    }
    sample.sort_unstable();
    let mut s: Vec<u64> = (1..ways).map(|r| sample[r * sample.len() / ways]).collect();
    s.dedup();
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn equal_keys_combine_across_streams_and_pieces() {
        // Stream 0 over two pieces: [1, 4] then [6]; stream 1: [4, 5, 6].
        let (a, b, c) = ([1u64, 4], [6u64], [4u64, 5, 6]);
        let (ia, ib, ic) = ([1u128, 2], [3u128], [10u128, 20, 30]);
        let cursors = vec![
            Cursor::new(vec![(&a[..], &ia[..]), (&b[..], &ib[..])]),
            Cursor::new(vec![(&c[..], &ic[..])]),
            Cursor::new(vec![]),
        ];
        let (mut keys, mut counts) = (Vec::new(), Vec::<u128>::new());
        merge(cursors, &mut keys, &mut counts).unwrap();
        assert_eq!(keys, vec![1, 4, 5, 6]);
        assert_eq!(counts, vec![1, 12, 20, 33]);
    }

    #[test]
    fn splitters_cut_the_sample_evenly() {
        let run: Vec<u64> = (0..160).collect();
        assert_eq!(splitters([&run[..]].into_iter(), 2), vec![80]);
        assert!(splitters([&run[..]].into_iter(), 1).is_empty());
    }
}
