//! One step of a frontier, compiled: add variables, check the constraints they complete,
//! forget the variables no unfinished constraint reads.
//!
//! # Method
//!
//! For every input key (in increasing order) the step forms the allowed value patterns of
//! the added variables by table look-up ([`Check`]), writes each into the key (shifted up
//! first under [`super::layout::Packing::Newest`]), forgets fields ([`Forget`]), and appends
//! the result with the input's item ([`Payload::item`]) to one of several output *streams*.
//! A stream is one pattern of the values of the fields that a step forgets, and of the
//! added fields unless they lie below every field kept from the input: within a stream the
//! map from (input key, pattern) to output key is then strictly increasing, so every stream
//! comes out sorted without duplicates, and the step ends with a merge of a few sorted
//! streams ([`super::merge`]) — never a sort.
//!
//! *Reversal pairs* (the transfer operator): a key and its image under complementing every
//! field are one state, represented by the smaller of the two. Complementing reverses the
//! order, so the reversed outputs of a stream go to a stream of their own, which is
//! reversed before the merge.

use std::sync::Arc;

use super::check::{Check, Index};
use super::layout::{Field, Forget, mask};
use super::payload::Payload;

/// Largest number of value patterns of one step (the allowed patterns are a `u64` bit set).
pub(crate) const MAX_PATTERNS: usize = 64;

/// Sorted output keys with their items.
#[derive(Debug)]
pub(crate) struct Stream<I> {
    pub keys: Vec<u64>,
    pub items: Vec<I>,
}

impl<I> Default for Stream<I> {
    fn default() -> Self {
        Stream {
            keys: Vec::new(),
            items: Vec::new(),
        }
    }
}

impl<I> Stream<I> {
    pub fn clear(&mut self) {
        self.keys.clear();
        self.items.clear();
    }
}

/// A constraint completed by a step: its scope variables' fields, in table order, in the
/// key after the added variables are written (offset, states), and its table's bits.
#[derive(Clone, Debug)]
pub(crate) struct Completed {
    pub reads: Vec<(u32, u32)>,
    pub table: Arc<[u64]>,
}

/// One compiled step.
#[derive(Clone, Debug)]
pub(crate) struct Step {
    /// Bits the input key moves up before the added values are written.
    shift: u32,
    /// Every assignment of the added variables, as bits of the shifted key, increasing.
    patterns: Vec<u64>,
    /// The bit set of every pattern.
    all: u64,
    checks: Vec<Check>,
    forget: Forget,
    /// (offset, mask) in the shifted key of the fields that tell the streams apart.
    by: Vec<(u32, u64)>,
    /// Number of streams (without reversal).
    streams: usize,
    /// The bits of every field after the step (complementing them is the reversal).
    occupied: u64,
}

impl Step {
    /// Compile a step.
    ///
    /// * `before`: the bits in use in an input key;
    /// * `shift`: how far an input key moves up before the added values are written;
    /// * `added`: (offset in the shifted key, states) of each added variable;
    /// * `completed`: the constraints checked at this step;
    /// * `forgotten`: the fields forgotten (offsets in the shifted key), and `forget` what
    ///   that does to a key;
    /// * `occupied`: the bits in use after the step.
    pub fn new(
        before: u64,
        shift: u32,
        added: &[(u32, u32)],
        completed: &[Completed],
        forgotten: &[Field],
        forget: Forget,
        occupied: u64,
    ) -> Step {
        let width = |q: u32| super::layout::width(q);
        // Every assignment of the added variables, increasing.
        let mut patterns = vec![0u64];
        for &(offset, q) in added {
            patterns = patterns
                .iter()
                .flat_map(|&p| (0..q as u64).map(move |x| p | (x << offset)))
                .collect();
        }
        patterns.sort_unstable();
        assert!(
            patterns.len() <= MAX_PATTERNS,
            "at most {MAX_PATTERNS} patterns per step"
        );
        let all = if patterns.len() == 64 {
            u64::MAX
        } else {
            (1u64 << patterns.len()) - 1
        };
        let is_added = |off: u32| added.iter().any(|a| a.0 == off);
        let checks = completed
            .iter()
            .map(|c| {
                let mut stride = 1u64;
                let mut known = Vec::new();
                let mut new: Vec<(u32, u64, u64)> = Vec::new();
                for &(off, q) in &c.reads {
                    let field = (off, mask(width(q)), stride);
                    if is_added(off) {
                        new.push(field);
                    } else {
                        debug_assert!(off >= shift, "a field of the input key");
                        known.push((off - shift, field.1, stride));
                    }
                    stride *= q as u64;
                }
                let new = Index(new);
                let parts = patterns.iter().map(|&p| new.of(p)).collect();
                Check::new(Index(known), parts, c.table.clone())
            })
            .collect();
        // Streams: the forgotten fields, and the added ones kept unless they lie below
        // every field kept from the input.
        let gone = forgotten
            .iter()
            .fold(0u64, |a, f| a | (mask(f.width) << f.offset));
        let kept_before = (before << shift) & !gone;
        let new_bits = added
            .iter()
            .fold(0u64, |a, &(off, q)| a | (mask(width(q)) << off));
        let kept_new = new_bits & !gone;
        let mut by: Vec<(u32, u64)> = forgotten
            .iter()
            .map(|f| (f.offset, mask(f.width)))
            .collect();
        if kept_new != 0
            && kept_before != 0
            && 63 - kept_new.leading_zeros() > kept_before.trailing_zeros()
        {
            for &(off, q) in added {
                if (mask(width(q)) << off) & gone == 0 {
                    by.push((off, mask(width(q))));
                }
            }
        }
        let streams = by.iter().fold(1usize, |a, &(_, m)| a * (m as usize + 1));
        Step {
            shift,
            patterns,
            all,
            checks,
            forget,
            by,
            streams,
            occupied,
        }
    }

    /// Every assignment of the added variables, as bits of the shifted key (the value of
    /// the variable added at offset `o` with `q` states is `(pattern >> o) & mask(width(q))`),
    /// in the order whose index [`Payload::item_at`] receives.
    #[allow(dead_code)] // read by the weighted payloads being built
    pub fn patterns(&self) -> &[u64] {
        &self.patterns
    }

    /// Number of streams (without reversal).
    pub fn streams(&self) -> usize {
        self.streams
    }

    /// The bits of every field after the step (complementing them is the reversal).
    #[cfg(test)]
    pub fn occupied(&self) -> u64 {
        self.occupied
    }

    /// The same step without the checks `drop` names (by their order in `completed`).
    pub fn without(&self, drop: impl Fn(usize) -> bool) -> Step {
        let mut s = self.clone();
        s.checks = self
            .checks
            .iter()
            .enumerate()
            .filter(|(i, _)| !drop(*i))
            .map(|(_, c)| c.clone())
            .collect();
        s
    }

    /// The patterns (a bit set) every check allows after `key`.
    #[inline]
    fn allowed(&self, key: u64) -> u64 {
        let mut allowed = self.all;
        for c in &self.checks {
            allowed &= c.allowed(key);
        }
        allowed
    }

    /// Call `f` with every successor of `key` before forgetting (the key with the added
    /// values written) that every check allows.
    #[inline]
    pub fn successors(&self, key: u64, mut f: impl FnMut(u64)) {
        let mut allowed = self.allowed(key);
        let base = key << self.shift;
        while allowed != 0 {
            let p = allowed.trailing_zeros() as usize;
            allowed &= allowed - 1;
            f(base | self.patterns[p]);
        }
    }

    /// Forget fields of a successor.
    #[inline]
    pub fn forget(&self, k: u64) -> u64 {
        match &self.forget {
            Forget::Squeeze(runs) => Forget::squeeze(runs, k),
            Forget::Mask(keep) => k & keep,
        }
    }

    #[inline]
    fn stream(&self, k: u64) -> usize {
        let mut s = 0usize;
        let mut radix = 1usize;
        for &(off, mask) in &self.by {
            s += ((k >> off) & mask) as usize * radix;
            radix *= mask as usize + 1;
        }
        s
    }

    /// Extend sorted `keys` (with their payload) into `out`: [`Step::streams`] sorted
    /// streams, twice as many with `reversal` (the second half reversed keys, already put
    /// back in increasing order).
    pub fn extend<P: Payload>(
        &self,
        keys: &[u64],
        payload: &P,
        out: &mut [Stream<P::Item>],
        reversal: bool,
    ) {
        match (&self.forget, reversal) {
            (Forget::Squeeze(runs), false) => {
                self.extend_with::<P, _, false>(keys, payload, out, |k| Forget::squeeze(runs, k))
            }
            (Forget::Squeeze(runs), true) => {
                self.extend_with::<P, _, true>(keys, payload, out, |k| Forget::squeeze(runs, k))
            }
            (Forget::Mask(keep), false) => {
                self.extend_with::<P, _, false>(keys, payload, out, |k| k & keep)
            }
            (Forget::Mask(keep), true) => {
                self.extend_with::<P, _, true>(keys, payload, out, |k| k & keep)
            }
        }
        if reversal {
            for s in &mut out[self.streams..2 * self.streams] {
                s.keys.reverse();
                s.items.reverse();
            }
        }
    }

    #[inline(always)]
    fn extend_with<P: Payload, F: Fn(u64) -> u64, const REVERSAL: bool>(
        &self,
        keys: &[u64],
        payload: &P,
        out: &mut [Stream<P::Item>],
        forget: F,
    ) {
        for (i, &key) in keys.iter().enumerate() {
            let mut allowed = self.allowed(key);
            let base = key << self.shift;
            while allowed != 0 {
                let p = allowed.trailing_zeros() as usize;
                allowed &= allowed - 1;
                let k = base | self.patterns[p];
                let mut s = self.stream(k);
                let mut o = forget(k);
                if REVERSAL && (o ^ self.occupied) < o {
                    o ^= self.occupied;
                    s += self.streams;
                }
                let st = &mut out[s];
                st.keys.push(o);
                st.items.push(payload.item_at(i, p));
            }
        }
    }
}
