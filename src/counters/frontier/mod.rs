//! The frontier engine: the dynamic programming over packed partial assignments that both
//! the exact counter ([`super::exact`]) and the transfer operator ([`super::transfer`]) run.
//!
//! # What it computes
//!
//! A *frontier* is a set of partial assignments of the variables that some unfinished
//! constraint still reads, each packed into a `u64` key, each carrying a payload. A *step*
//! adds variables, checks the constraints they complete and forgets the variables no
//! unfinished constraint reads; the successors of equal keys are combined. What a state
//! carries is generic ([`payload`]): the exact counter carries counts, the transfer operator
//! the indices of the input states (to build its rows) or nothing (to find the reachable
//! states).
//!
//! # Parts
//!
//! * [`layout`]: where the fields sit in a key — newest lowest and squeezed (the exact
//!   counter) or fixed slots (the transfer operator, which relabels them at the end of a
//!   column);
//! * [`check`]: a constraint compiled against the layout, (offset, mask, stride) fields and
//!   a table look-up that gives the allowed value patterns at once;
//! * [`step`]: add, check, forget, into sorted streams (with reversal pairs as an option);
//! * [`merge`]: the merge of the sorted streams into the next frontier;
//! * [`payload`]: counts, input indices, or nothing.
//!
//! [`Frontier::step`] puts them together: extend every piece of the frontier into its
//! streams, then merge; large frontiers run both in parallel.
//!
//! # Complexity
//!
//! A step costs O(S · p · c) for S input states, p value patterns and c completed
//! constraints, plus O(S' · s) for the merge of s streams into S' output states; memory
//! O(S + S'). Results do not depend on the number of threads: every piece and every key
//! range is processed in key order, and items of equal keys are combined in a fixed order
//! (counts add exactly; rows keep their inputs sorted).

pub(crate) mod check;
pub(crate) mod layout;
pub(crate) mod merge;
pub(crate) mod payload;
pub(crate) mod step;
pub(crate) mod weighted;

use rayon::prelude::*;

use merge::{Cursor, merge, splitters};
use payload::{Accumulator, Overflow, Payload};
use step::{Step, Stream};

/// Steps and applications with fewer states than this run on one thread: fine-grained
/// splitting measured slower than sequential work on two cores.
pub(crate) const PARALLEL_MIN: usize = 1 << 15;

/// How many parts the work on a frontier of `n` states is split into: one below
/// [`PARALLEL_MIN`], else twice the threads of the current pool.
pub(crate) fn ways(n: usize) -> usize {
    if n >= PARALLEL_MIN {
        2 * rayon::current_num_threads().max(1)
    } else {
        1
    }
}

/// A sorted run of unique keys with what they carry.
#[derive(Debug, Default)]
pub(crate) struct Piece<P> {
    pub keys: Vec<u64>,
    pub payload: P,
}

impl<P> Piece<P> {
    pub fn len(&self) -> usize {
        self.keys.len()
    }
}

/// A frontier: sorted pieces covering increasing key ranges, with the stream buffers kept
/// from step to step (fresh large allocations cost page faults on every step).
#[derive(Debug)]
pub(crate) struct Frontier<P: Payload> {
    pub pieces: Vec<Piece<P>>,
    /// scratch[p][s]: stream s of piece p.
    scratch: Vec<Vec<Stream<P::Item>>>,
}

impl<P: Payload> Frontier<P> {
    /// A frontier of these pieces.
    pub fn new(pieces: Vec<Piece<P>>) -> Self {
        Frontier {
            pieces,
            scratch: Vec::new(),
        }
    }

    /// Number of states.
    pub fn len(&self) -> usize {
        self.pieces.iter().map(Piece::len).sum()
    }

    /// One step: the successors of every state, merged into `out` (one piece per key range;
    /// the buffers of `out` are reused). `reversal` pairs every key with its complement in
    /// the step's fields (see [`step`]). [`Overflow`] when a payload overflows.
    pub fn step<A: Accumulator<P::Item>>(
        &mut self,
        step: &Step,
        reversal: bool,
        out: &mut Vec<Piece<A>>,
    ) -> Result<(), Overflow> {
        self.step_in(step, reversal, out, ways(self.len()))
    }

    /// [`Frontier::step`] with the work split `ways` ways.
    fn step_in<A: Accumulator<P::Item>>(
        &mut self,
        step: &Step,
        reversal: bool,
        out: &mut Vec<Piece<A>>,
        ways: usize,
    ) -> Result<(), Overflow> {
        let slots = step.streams() * if reversal { 2 } else { 1 };
        // 1. Extend every piece into its streams.
        self.scratch.resize_with(self.pieces.len(), Vec::new);
        for sc in &mut self.scratch {
            sc.resize_with(slots.max(sc.len()), Stream::default);
            sc.iter_mut().for_each(Stream::clear);
        }
        let extend = |(p, sc): (&Piece<P>, &mut Vec<Stream<P::Item>>)| {
            step.extend(&p.keys, &p.payload, &mut sc[..slots], reversal)
        };
        if ways > 1 {
            self.pieces
                .par_iter()
                .zip(self.scratch.par_iter_mut())
                .for_each(extend);
        } else {
            self.pieces
                .iter()
                .zip(self.scratch.iter_mut())
                .for_each(extend);
        }
        if slots == 1 {
            // Nothing forgotten: every piece's single stream is already a piece.
            out.resize_with(self.pieces.len(), Piece::default);
            out.truncate(self.pieces.len());
            for (o, sc) in out.iter_mut().zip(self.scratch.iter_mut()) {
                std::mem::swap(&mut o.keys, &mut sc[0].keys);
                o.payload.adopt(&mut sc[0].items)?;
            }
            return Ok(());
        }
        // 2. Split the output key space into `ways` ranges of similar size.
        let cuts = if ways > 1 {
            splitters(
                self.scratch
                    .iter()
                    .flat_map(|sc| sc[..slots].iter().map(|s| &s.keys[..])),
                ways,
            )
        } else {
            Vec::new()
        };
        // 3. Merge each range's streams into its own output piece.
        let ranges = cuts.len() + 1;
        out.resize_with(ranges, Piece::default);
        out.truncate(ranges);
        let scratch = &self.scratch;
        let streams = step.streams();
        let merge_range = |(r, out): (usize, &mut Piece<A>)| -> Result<(), Overflow> {
            out.keys.clear();
            out.payload.clear();
            let lo = if r == 0 { 0 } else { cuts[r - 1] };
            let hi = cuts.get(r).copied().unwrap_or(u64::MAX);
            let cursors: Vec<Cursor<P::Item>> = (0..slots)
                .map(|s| {
                    // Reversed streams run from the last piece to the first.
                    let order: Vec<&Vec<Stream<P::Item>>> = if s < streams {
                        scratch.iter().collect()
                    } else {
                        scratch.iter().rev().collect()
                    };
                    let slices = order
                        .into_iter()
                        .filter_map(|sc| {
                            let st = &sc[s];
                            let a = st.keys.partition_point(|&k| k < lo);
                            let b = st.keys.partition_point(|&k| k < hi);
                            (a < b).then(|| (&st.keys[a..b], &st.items[a..b]))
                        })
                        .collect();
                    Cursor::new(slices)
                })
                .collect();
            merge(cursors, &mut out.keys, &mut out.payload)
        };
        if ranges > 1 {
            out.par_iter_mut()
                .enumerate()
                .map(merge_range)
                .collect::<Result<Vec<()>, Overflow>>()?;
        } else {
            merge_range((0, &mut out[0]))?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use std::sync::Arc;

    use super::layout::{Forget, Layout, width};
    use super::payload::{Indices, Keys, RowBuilder};
    use super::step::Completed;
    use super::*;

    /// A chain of `n` binary variables with "not both 1" between neighbours, swept left to
    /// right: the Fibonacci numbers, counted with every layout, and rows that add up to
    /// the same.
    fn chain_steps(newest: bool, n: usize) -> Vec<Step> {
        let table: Arc<[u64]> = Arc::from(vec![0b0111u64]);
        let mut layout = if newest {
            Layout::newest()
        } else {
            Layout::slots(Vec::new())
        };
        let mut steps = Vec::new();
        for v in 0..n {
            let before = layout.occupied();
            let shift = layout.shift(width(2));
            let at = layout.add(v, 1).unwrap();
            let completed: Vec<Completed> = if v > 0 {
                let prev = layout.field(v - 1).unwrap().offset;
                vec![Completed {
                    reads: vec![(prev, 2), (at, 2)],
                    table: table.clone(),
                }]
            } else {
                Vec::new()
            };
            let leaving: Vec<usize> = if v > 0 { vec![v - 1] } else { Vec::new() };
            let (gone, forget) = layout.forget(&leaving);
            steps.push(Step::new(
                before,
                shift,
                &[(at, 2)],
                &completed,
                &gone,
                forget,
                layout.occupied(),
            ));
        }
        steps
    }

    #[test]
    fn both_layouts_count_fibonacci() {
        for newest in [true, false] {
            let steps = chain_steps(newest, 20);
            let mut f = Frontier::new(vec![Piece {
                keys: vec![0],
                payload: vec![1u128],
            }]);
            for s in &steps {
                let mut out = Vec::new();
                f.step(s, false, &mut out).unwrap();
                f.pieces = out;
            }
            let total: u128 = f.pieces.iter().flat_map(|p| p.payload.iter()).sum();
            assert_eq!(total, 17711, "F(22), newest lowest: {newest}");
            // The last variable is on the frontier: two keys (0 and 1).
            assert_eq!(f.len(), 2);
        }
    }

    #[test]
    fn rows_and_keys_follow_the_counts() {
        let steps = chain_steps(false, 6);
        let mut keys = vec![0u64];
        let mut counts = vec![1u128];
        for s in &steps {
            // Keys only.
            let mut f = Frontier::new(vec![Piece {
                keys: keys.clone(),
                payload: Keys,
            }]);
            let mut out: Vec<Piece<Keys>> = Vec::new();
            f.step(s, false, &mut out).unwrap();
            // Rows: a row's inputs add up to the count of its key.
            let mut f = Frontier::new(vec![Piece {
                keys: keys.clone(),
                payload: Indices { first: 0 },
            }]);
            let mut rows: Vec<Piece<RowBuilder>> = Vec::new();
            f.step(s, false, &mut rows).unwrap();
            let r = &rows[0].payload;
            let mut next = Vec::new();
            for j in 0..rows[0].len() {
                let end = r.starts.get(j + 1).map_or(r.sources.len(), |&e| e as usize);
                let sources = &r.sources[r.starts[j] as usize..end];
                assert!(sources.windows(2).all(|w| w[0] <= w[1]));
                next.push(sources.iter().map(|&i| counts[i as usize]).sum::<u128>());
            }
            assert_eq!(out[0].keys, rows[0].keys);
            keys = out[0].keys.clone();
            counts = next;
        }
        assert_eq!(counts.iter().sum::<u128>(), 21, "F(8)");
        let _ = Forget::Mask(0);
    }

    /// Whether pieces hold strictly increasing keys over increasing ranges.
    fn sorted<P>(pieces: &[Piece<P>]) -> bool {
        let keys: Vec<u64> = pieces.iter().flat_map(|p| p.keys.iter().copied()).collect();
        keys.windows(2).all(|w| w[0] < w[1])
    }

    /// The keys of pieces, one after the other.
    fn keys_of<P>(pieces: &[Piece<P>]) -> Vec<u64> {
        pieces.iter().flat_map(|p| p.keys.iter().copied()).collect()
    }

    /// Random constraints over a random sequence of variables, swept in order with either
    /// packing and with the work split one or three ways: after every step the keys are
    /// sorted and unique, the counts add up to brute force, and pairing keys with their
    /// complements gives the representatives of the plain step's keys.
    #[test]
    fn random_steps_keep_keys_sorted_and_count_like_brute_force() {
        use rand::Rng;
        let mut rng = rand_pcg::Pcg64Mcg::new(12);
        let mut below = |n: u64| rng.next_u64() % n;
        for case in 0..60 {
            let n = 5 + below(6) as usize;
            let states: Vec<u32> = (0..n).map(|_| 2 + below(3) as u32).collect();
            // (scope, table bits) with scopes inside windows of four variables.
            let mut constraints: Vec<(Vec<usize>, Vec<u64>)> = Vec::new();
            for _ in 0..n + below(4) as usize {
                let start = below(n as u64 - 1) as usize;
                let mut scope = vec![start];
                for _ in 0..1 + below(2) {
                    let v = (start + 1 + below(3) as usize).min(n - 1);
                    if !scope.contains(&v) {
                        scope.push(v);
                    }
                }
                let size: u64 = scope.iter().map(|&v| states[v] as u64).product();
                let mut bits = vec![0u64; size.div_ceil(64) as usize];
                for i in 0..size {
                    if below(10) < 6 {
                        bits[(i >> 6) as usize] |= 1 << (i & 63);
                    }
                }
                constraints.push((scope, bits));
            }
            // Brute force.
            let total: u64 = states.iter().map(|&q| q as u64).product();
            let mut expected = 0u128;
            for a in 0..total {
                let mut rest = a;
                let values: Vec<u64> = states
                    .iter()
                    .map(|&q| {
                        let x = rest % q as u64;
                        rest /= q as u64;
                        x
                    })
                    .collect();
                let ok = constraints.iter().all(|(scope, bits)| {
                    let (mut index, mut stride) = (0u64, 1u64);
                    for &v in scope {
                        index += values[v] * stride;
                        stride *= states[v] as u64;
                    }
                    check::bit(bits, index)
                });
                expected += u128::from(ok);
            }
            // The plan of the order 0, 1, …: completions and last uses.
            let last_of = |c: &(Vec<usize>, Vec<u64>)| *c.0.iter().max().expect("a scope");
            let mut leaving: Vec<Vec<usize>> = vec![Vec::new(); n];
            for v in 0..n {
                let last = constraints
                    .iter()
                    .filter(|c| c.0.contains(&v))
                    .map(last_of)
                    .max()
                    .unwrap_or(v);
                leaving[last].push(v);
            }
            for newest in [true, false] {
                let mut layout = if newest {
                    Layout::newest()
                } else {
                    // A constant field in the way, so that fields land above and below it.
                    Layout::slots(vec![layout::Field {
                        var: usize::MAX,
                        offset: below(4) as u32,
                        width: 1 + below(3) as u32,
                    }])
                };
                let mut steps = Vec::new();
                for v in 0..n {
                    let before = layout.occupied();
                    let shift = layout.shift(width(states[v]));
                    let at = layout.add(v, width(states[v])).expect("fits");
                    let completed: Vec<Completed> = constraints
                        .iter()
                        .filter(|c| last_of(c) == v)
                        .map(|(scope, bits)| Completed {
                            reads: scope
                                .iter()
                                .map(|&u| (layout.field(u).expect("on").offset, states[u]))
                                .collect(),
                            table: Arc::from(bits.as_slice()),
                        })
                        .collect();
                    let (gone, forget) = layout.forget(&leaving[v]);
                    steps.push(Step::new(
                        before,
                        shift,
                        &[(at, states[v])],
                        &completed,
                        &gone,
                        forget,
                        layout.occupied(),
                    ));
                }
                for split in [1, 3] {
                    let mut f = Frontier::new(vec![Piece {
                        keys: vec![0],
                        payload: vec![1u128],
                    }]);
                    for s in &steps {
                        // Keys only, from the frontier cut in three pieces: paired with
                        // their complements they are the representatives of the plain keys.
                        let keys = keys_of(&f.pieces);
                        let third = keys.len().div_ceil(3).max(1);
                        let cut = || -> Vec<Piece<Keys>> {
                            keys.chunks(third)
                                .map(|c| Piece {
                                    keys: c.to_vec(),
                                    payload: Keys,
                                })
                                .collect()
                        };
                        let (mut plain, mut paired): (Vec<Piece<Keys>>, Vec<Piece<Keys>>) =
                            (Vec::new(), Vec::new());
                        Frontier::new(cut())
                            .step_in(s, false, &mut plain, split)
                            .unwrap();
                        Frontier::new(cut())
                            .step_in(s, true, &mut paired, split)
                            .unwrap();
                        assert!(sorted(&plain) && sorted(&paired), "case {case}");
                        let mut reps: Vec<u64> = keys_of(&plain)
                            .iter()
                            .map(|&k| k.min(k ^ s.occupied()))
                            .collect();
                        reps.sort_unstable();
                        reps.dedup();
                        assert_eq!(keys_of(&paired), reps, "case {case}");
                        // Counts.
                        let mut out = Vec::new();
                        f.step_in(s, false, &mut out, split).unwrap();
                        f.pieces = out;
                        assert!(
                            sorted(&f.pieces),
                            "case {case}, newest {newest}, split {split}"
                        );
                        assert_eq!(keys_of(&f.pieces), keys_of(&plain));
                    }
                    let count: u128 = f.pieces.iter().flat_map(|p| p.payload.iter()).sum();
                    assert_eq!(
                        count, expected,
                        "case {case}, newest {newest}, split {split}"
                    );
                }
            }
        }
    }
}
