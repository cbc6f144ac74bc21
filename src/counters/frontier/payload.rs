//! What a frontier state carries through a step, and how the items of equal keys combine.
//!
//! A step hands every surviving successor of a state an *item* ([`Payload::item`]); the
//! merge gathers the items of equal keys into the next frontier ([`Accumulator`]). The
//! engine never looks inside an item, so the same steps carry:
//!
//! * exact counts ([`Count`]: `u128`, fixed-width [`Wide`] integers, `BigUint`), added with
//!   overflow detected — the exact counter;
//! * input indices ([`Indices`] in, [`RowBuilder`] out): for every output state the sorted
//!   list of the input states that lead to it — the rows of the transfer operator;
//! * nothing ([`Keys`]): only the set of reachable keys — the transfer operator's closure.
//!
//! A weighted count (a float activity, a polynomial in a fugacity) is one more pair of
//! these traits: its [`Payload::item_at`] multiplies by the weights of the values a step
//! adds (the step's patterns, [`super::step::Step::patterns`]).

use num_bigint::BigUint;

/// The items of equal keys did not fit the count type: the caller retries in a wider one.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) struct Overflow;

/// What the states of one piece of a frontier carry.
pub(crate) trait Payload: Send + Sync {
    /// What a state hands to each of its successors.
    type Item: Send + Sync;
    /// The item state `i` of the piece hands on.
    fn item(&self, i: usize) -> Self::Item;
    /// The item state `i` hands to its successor by the added values of pattern `pattern`
    /// (an index into [`super::step::Step::patterns`]): a weighted payload multiplies by
    /// the weights of those values here. The default hands on [`Payload::item`] unchanged.
    #[inline(always)]
    fn item_at(&self, i: usize, pattern: usize) -> Self::Item {
        let _ = pattern;
        self.item(i)
    }
}

/// Where a merge collects the items of the keys it writes, in increasing key order.
pub(crate) trait Accumulator<I>: Default + Send {
    /// Forget everything (the buffers are kept).
    fn clear(&mut self);
    /// A new key, with its first item.
    fn first(&mut self, item: &I) -> Result<(), Overflow>;
    /// One more item of the last key.
    fn again(&mut self, item: &I) -> Result<(), Overflow>;
    /// Take the items of one stream whose keys are already unique, one per key (the
    /// stream's buffer may be swapped with this one's).
    fn adopt(&mut self, items: &mut Vec<I>) -> Result<(), Overflow> {
        self.clear();
        for item in items.iter() {
            self.first(item)?;
        }
        items.clear();
        Ok(())
    }
}

/// An exact count: every addition is checked.
pub(crate) trait Count: Clone + Send + Sync + Sized {
    fn zero() -> Self;
    fn one() -> Self;
    /// `self += other`; `false` on overflow.
    fn add(&mut self, other: &Self) -> bool;
    fn into_big(self) -> BigUint;
}

impl Count for u128 {
    fn zero() -> Self {
        0
    }
    fn one() -> Self {
        1
    }
    #[inline]
    fn add(&mut self, other: &Self) -> bool {
        match self.checked_add(*other) {
            Some(s) => {
                *self = s;
                true
            }
            None => false,
        }
    }
    fn into_big(self) -> BigUint {
        BigUint::from(self)
    }
}

impl Count for BigUint {
    fn zero() -> Self {
        BigUint::from(0u32)
    }
    fn one() -> Self {
        BigUint::from(1u32)
    }
    /// In place (`acc += &x`): measured about five times faster than `&a + &b`.
    #[inline]
    fn add(&mut self, other: &Self) -> bool {
        *self += other;
        true
    }
    fn into_big(self) -> BigUint {
        self
    }
}

/// A fixed-width unsigned integer of `N` 64-bit limbs (least significant first): counts
/// beyond u128 without an allocation per state.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) struct Wide<const N: usize>(pub [u64; N]);

impl<const N: usize> Count for Wide<N> {
    fn zero() -> Self {
        Wide([0; N])
    }
    fn one() -> Self {
        let mut w = [0; N];
        w[0] = 1;
        Wide(w)
    }
    #[inline]
    fn add(&mut self, other: &Self) -> bool {
        let mut carry = false;
        for (a, b) in self.0.iter_mut().zip(&other.0) {
            let (s1, c1) = a.overflowing_add(*b);
            let (s2, c2) = s1.overflowing_add(carry as u64);
            *a = s2;
            carry = c1 | c2;
        }
        !carry
    }
    fn into_big(self) -> BigUint {
        let digits: Vec<u32> = self
            .0
            .iter()
            .flat_map(|l| [*l as u32, (*l >> 32) as u32])
            .collect();
        BigUint::new(digits)
    }
}

/// Counts: each state hands its count to every successor; equal keys add.
impl<C: Count> Payload for Vec<C> {
    type Item = C;
    #[inline]
    fn item(&self, i: usize) -> C {
        self[i].clone()
    }
}

impl<C: Count> Accumulator<C> for Vec<C> {
    fn clear(&mut self) {
        Vec::clear(self);
    }
    #[inline]
    fn first(&mut self, item: &C) -> Result<(), Overflow> {
        self.push(item.clone());
        Ok(())
    }
    #[inline]
    fn again(&mut self, item: &C) -> Result<(), Overflow> {
        let last = self.last_mut().expect("a key was started");
        if last.add(item) {
            Ok(())
        } else {
            Err(Overflow)
        }
    }
    fn adopt(&mut self, items: &mut Vec<C>) -> Result<(), Overflow> {
        std::mem::swap(self, items);
        items.clear();
        Ok(())
    }
}

/// Input states known by their index: the state `i` of a piece that starts at global
/// index `first` hands on `first + i`.
#[derive(Clone, Copy, Debug, Default)]
pub(crate) struct Indices {
    /// Global index of the piece's first state.
    pub first: u32,
}

impl Payload for Indices {
    type Item = u32;
    #[inline]
    fn item(&self, i: usize) -> u32 {
        self.first + i as u32
    }
}

/// The rows of a step: for every output key the indices of its inputs, in increasing
/// order (so that sums over a row do not depend on how the work was split), as compressed
/// rows.
#[derive(Clone, Debug, Default)]
pub(crate) struct RowBuilder {
    /// The inputs of every row, one row after the other.
    pub sources: Vec<u32>,
    /// Where every row starts in `sources`.
    pub starts: Vec<u32>,
}

impl Accumulator<u32> for RowBuilder {
    fn clear(&mut self) {
        self.sources.clear();
        self.starts.clear();
    }
    #[inline]
    fn first(&mut self, &item: &u32) -> Result<(), Overflow> {
        self.starts.push(self.sources.len() as u32);
        self.sources.push(item);
        Ok(())
    }
    /// Rows are short (one input per stream at most): insertion keeps them sorted.
    #[inline]
    fn again(&mut self, &item: &u32) -> Result<(), Overflow> {
        let start = *self.starts.last().expect("a row was started") as usize;
        let at = start + self.sources[start..].partition_point(|&s| s <= item);
        self.sources.insert(at, item);
        Ok(())
    }
}

/// No payload: a frontier of keys only (equal keys are simply one key).
#[derive(Clone, Copy, Debug, Default)]
pub(crate) struct Keys;

impl Payload for Keys {
    type Item = ();
    #[inline]
    fn item(&self, _: usize) {}
}

impl Accumulator<()> for Keys {
    fn clear(&mut self) {}
    #[inline]
    fn first(&mut self, _: &()) -> Result<(), Overflow> {
        Ok(())
    }
    #[inline]
    fn again(&mut self, _: &()) -> Result<(), Overflow> {
        Ok(())
    }
    fn adopt(&mut self, items: &mut Vec<()>) -> Result<(), Overflow> {
        items.clear();
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wide_integers_carry_and_detect_overflow() {
        let mut a = Wide::<2>([u64::MAX, 0]);
        assert!(a.add(&Wide::<2>::one()));
        assert_eq!(a.0, [0, 1]);
        assert_eq!(a.into_big(), BigUint::from(1u128 << 64));
        let mut full = Wide::<2>([u64::MAX, u64::MAX]);
        assert!(
            !full.add(&Wide::<2>::one()),
            "2^128 does not fit in two limbs"
        );
    }

    #[test]
    fn counts_add_and_report_overflow() {
        let mut v: Vec<u128> = Vec::new();
        v.first(&(u128::MAX - 1)).unwrap();
        v.again(&1).unwrap();
        assert_eq!(v, vec![u128::MAX]);
        assert_eq!(v.again(&1), Err(Overflow));
    }

    #[test]
    fn rows_stay_sorted_by_input() {
        let mut r = RowBuilder::default();
        r.first(&7).unwrap();
        r.again(&3).unwrap();
        r.again(&9).unwrap();
        r.first(&1).unwrap();
        assert_eq!(r.sources, vec![3, 7, 9, 1]);
        assert_eq!(r.starts, vec![0, 3]);
    }
}
