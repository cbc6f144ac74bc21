//! Finding the charge sector that holds the largest eigenvalue of a column operator, and
//! checking it, width after width.
//!
//! # What it computes
//!
//! When the rule conserves a charge across the column ([`super::sector`]), T is block
//! diagonal and its largest eigenvalue lies in one block. Which one is not a matter of
//! counting states: for close-packed dimers on the honeycomb lattice the charge held by the
//! most boundary assignments is a frozen sector (λ = 2 at every width) while the largest
//! eigenvalue sits near two thirds of the maximal charge. [`Finder::width`] returns the
//! largest eigenvalue of one width from the sector found to hold it, says how that was
//! established ([`SectorBasis`]) and records the comparisons as [`CrossCheck`]s.
//!
//! # Method
//!
//! * **Full space** (when its boundary states are at most [`FULL_CHECK_STATES`]): the
//!   largest eigenvalue of the operator on every state, whose eigenvector's weight per
//!   charge names the sector (a converged eigenvector carries only sectors whose λ agree to
//!   the iteration tolerance); that sector is then computed on its own and its λ must
//!   equal the full space's ([`Route::FullSpace`]). If it does not, no sector is trusted
//!   again in the run: later widths keep the full space or are refused.
//! * **Neighbours** (otherwise): the charge predicted from the checked widths (the
//!   reversal-symmetric charge if that is what every checked width had, else both integers
//!   around a straight line through the charges found against the width, the larger
//!   eigenvalue kept), then the nearest non-empty charges on both sides, climbing to a
//!   larger eigenvalue while one is found. When both
//!   neighbours fit within [`NEIGHBOUR_STATES`] states the width is a checked local
//!   maximum ([`Route::NeighbourSectors`]); otherwise the predicted sector is used and
//!   reported as [`SectorBasis::Predicted`]. Mirror images under reversal (charge q ↦ Σc −
//!   q) have equal eigenvalues and are not computed twice.
//! * A prediction needs at least [`MIN_CHECKED`] checked widths; when the widths asked for
//!   start above the full-space limit, the smaller widths whose full space fits are checked
//!   first (they are cheap by construction and are not part of the results). With fewer checked widths the search
//!   starts from the first guess of [`Column::guess`] and must end at a checked local
//!   maximum; if the neighbours cannot be computed either, the width is refused
//!   ([`Error::Model`]) rather than guessed.
//!
//! # Complexity
//!
//! A checked width costs the full space (at most [`FULL_CHECK_STATES`] boundary states)
//! or up to two neighbouring sectors (at most [`NEIGHBOUR_STATES`] each) besides the kept
//! sector; the checks therefore stop growing with the width, and the largest widths cost
//! what they did without them.

use std::collections::HashMap;

use super::{Column, Kept, SectorBasis, StripConfig, StripResult};
use crate::crosscheck::{CrossCheck, Route};
use crate::crystal::Crystal;
use crate::error::{Error, Result};
use crate::estimate::Method;

/// Largest full space (boundary states) computed to check the sector at a width.
pub const FULL_CHECK_STATES: usize = 1 << 14;

/// Largest neighbouring sector (boundary states) computed to check the sector.
pub const NEIGHBOUR_STATES: usize = 1 << 15;

/// Checked widths needed before a sector is predicted.
pub const MIN_CHECKED: usize = 2;

/// A predicted charge this close to an integer is that integer; further away, both
/// integers around it are computed (common practice, no source: a line through rounded
/// values is trusted to a quarter).
const AMBIGUOUS: f64 = 0.25;

/// Charges looked at on each side of a sector for a non-empty neighbour.
const NEIGHBOUR_GAP: i64 = 4;

/// A width at which the sector was checked.
#[derive(Clone, Copy, Debug)]
struct Checked {
    width: usize,
    /// The charge kept (|q| when T maps q to −q).
    charge: i64,
    /// Whether it is the reversal-symmetric charge (within one of Σc/2).
    centre: bool,
}

/// The outcome of one sector at one width.
enum Eval {
    /// No state of that charge continues for ever.
    Empty,
    /// Beyond the states allowed (this many).
    TooBig(usize),
    /// Computed.
    Value(Box<StripResult>),
}

/// Finds, width after width, the sector that holds the largest eigenvalue.
pub(super) struct Finder<'a> {
    crystal: &'a Crystal,
    config: &'a StripConfig,
    checked: Vec<Checked>,
    /// Every comparison made, in order.
    pub checks: Vec<CrossCheck>,
    /// Widths computed only to check the sector before a larger one (not results).
    pub calibration: Vec<usize>,
    /// Why sectors are no longer trusted (a full-space check failed).
    broken: Option<String>,
    /// A weighted crystal: the fields of the imposed means at which every operator is
    /// built (`None`: zero fields).
    pub point: Option<Vec<f64>>,
}

impl<'a> Finder<'a> {
    pub fn new(crystal: &'a Crystal, config: &'a StripConfig) -> Finder<'a> {
        Finder {
            crystal,
            config,
            checked: Vec::new(),
            checks: Vec::new(),
            calibration: Vec::new(),
            broken: None,
            point: None,
        }
    }

    /// The layout of a width, at the fields of [`Finder::point`].
    pub fn layout(&self, width: usize) -> Result<Column> {
        let mut layout = Column::layout(self.crystal, width, self.config)?;
        if let Some(h) = &self.point {
            layout.set_point(1.0, h);
        }
        Ok(layout)
    }

    /// The largest eigenvalue of a strip `width` cells wide, from the states
    /// `config.sectors` asks for (for [`super::Sectors::Largest`], the sector found here).
    pub fn width(&mut self, width: usize) -> Result<StripResult> {
        let layout = self.layout(width)?;
        match self.config.sectors {
            super::Sectors::Full => eigen(&layout.compiled(Kept::Full, self.config)?, self.config),
            super::Sectors::Charge(q) => {
                eigen(&layout.compiled(Kept::Charge(q), self.config)?, self.config)
            }
            super::Sectors::Largest if layout.charge.is_empty() => {
                eigen(&layout.compiled(Kept::Reduced, self.config)?, self.config)
            }
            super::Sectors::Largest => self.dominant(&layout, width),
        }
    }

    /// The sector of the largest eigenvalue at this width (see the module documentation).
    fn dominant(&mut self, layout: &Column, width: usize) -> Result<StripResult> {
        if let Some(r) = self.full_check(layout, width)? {
            return Ok(r);
        }
        if let Some(why) = &self.broken {
            return Err(Error::Sector {
                width,
                why: format!(
                    "the charge sector of the largest eigenvalue of a strip {width} cells wide \
                     cannot be established: {why}, and the full space at this width is beyond \
                     the {FULL_CHECK_STATES} states allowed for it"
                ),
            });
        }
        if self.checked.len() < MIN_CHECKED {
            self.calibrate(width)?;
        }
        // Too little history for a prediction: the first guess, which must then be
        // checked against its neighbours.
        let (starts, must_check) = if self.checked.len() < MIN_CHECKED {
            match layout.guess() {
                Kept::Charge(q) => (vec![q], true),
                _ => (vec![0], true),
            }
        } else {
            (self.predict(layout), false)
        };
        let r = self.search(layout, width, &starts)?;
        if must_check && matches!(r.basis, SectorBasis::Predicted { .. }) {
            return Err(Error::Sector {
                width,
                why: format!(
                    "the charge sector of the largest eigenvalue of a strip {width} cells wide \
                     cannot be established: its full space is beyond the {FULL_CHECK_STATES} \
                     boundary states allowed for a check, its neighbouring charges beyond \
                     {NEIGHBOUR_STATES} states, and fewer than {MIN_CHECKED} smaller widths \
                     were checked"
                ),
            });
        }
        Ok(r)
    }

    /// Check the widths below `width` by their full space (smallest first) until the full
    /// space no longer fits.
    fn calibrate(&mut self, width: usize) -> Result<()> {
        let first = if self.crystal.dimensions == 3 { 1 } else { 2 };
        for w in first..width {
            if self.checked.iter().any(|c| c.width == w) {
                continue;
            }
            let layout = self.layout(w)?;
            if layout.charge.is_empty() {
                continue;
            }
            if self.full_check(&layout, w)?.is_none() {
                break;
            }
            self.calibration.push(w);
        }
        Ok(())
    }

    /// The full-space check of one width, when the full space fits: `None` when it does not.
    fn full_check(&mut self, layout: &Column, width: usize) -> Result<Option<StripResult>> {
        let mut full = layout.uncompiled(Kept::Full)?;
        match full.compile_states(self.config, FULL_CHECK_STATES) {
            Ok(_) => {}
            Err(Error::Budget { .. }) => return Ok(None),
            Err(e) => return Err(e),
        }
        let Some((whole, x)) = full.iterate(self.config)? else {
            return Err(Error::Model(format!(
                "a strip {width} cells wide has no arrangement of unbounded length"
            )));
        };
        let weights = full.weight_by_charge(&x);
        let charge = weights.first().map_or(0, |w| w.0);
        let kept = match self.evaluate(layout, charge, usize::MAX)? {
            Eval::Value(r) => *r,
            Eval::Empty | Eval::TooBig(_) => {
                self.broken = Some(format!(
                    "at width {width} the full space's largest eigenvector lies in charge \
                     {charge}, which could not be computed on its own"
                ));
                return Ok(Some(whole));
            }
        };
        let check = self.check(Route::FullSpace { width }, &kept, &whole);
        let agrees = check.agrees();
        self.checks.push(check);
        if !agrees {
            self.broken = Some(format!(
                "at width {width} the sector of charge {charge} gives ln λ = {} against {} for \
                 the full space",
                kept.ln_lambda, whole.ln_lambda
            ));
            let mut whole = whole;
            whole.basis = SectorBasis::Whole;
            return Ok(Some(whole));
        }
        self.push_checked(layout, width, charge);
        let mut kept = kept;
        kept.basis = SectorBasis::FullSpace;
        Ok(Some(kept))
    }

    /// Climb from the predicted charges (the larger of them first) to a local maximum of λ
    /// over the charges.
    fn search(&mut self, layout: &Column, width: usize, starts: &[i64]) -> Result<StripResult> {
        let (low, high) = layout.charge_range();
        let mut cache: HashMap<i64, Eval> = HashMap::new();
        let full = usize::MAX;
        // The predicted charges, or the nearest non-empty one to the first.
        let mut best: Option<(i64, StripResult)> = None;
        for &c in starts {
            let c = c.clamp(low, high);
            if let Eval::Value(r) = self.cached(&mut cache, layout, c, full)?
                && best.as_ref().is_none_or(|b| r.ln_lambda > b.1.ln_lambda)
            {
                best = Some((c, (**r).clone()));
            }
        }
        if best.is_none() {
            let q = starts.first().copied().unwrap_or(0).clamp(low, high);
            for c in (1..=NEIGHBOUR_GAP).flat_map(|d| [q - d, q + d]) {
                if c < low || c > high {
                    continue;
                }
                if let Eval::Value(r) = self.cached(&mut cache, layout, c, full)? {
                    best = Some((c, (**r).clone()));
                    break;
                }
            }
        }
        let Some((mut q, mut best)) = best else {
            return Err(Error::Sector {
                width,
                why: format!(
                    "no charge sector near the predicted charge {} of a strip {width} cells \
                 wide has an arrangement of unbounded length",
                    starts.first().copied().unwrap_or(0)
                ),
            });
        };
        // Neighbours: climb while one is larger; a side that cannot be computed leaves the
        // width unchecked.
        let mut checked_both;
        let mut largest_neighbour: Option<StripResult>;
        let mut moves = 0;
        loop {
            checked_both = true;
            let mut neighbours: Vec<StripResult> = Vec::new();
            for dir in [-1i64, 1] {
                match self.neighbour(&mut cache, layout, q, dir, low, high)? {
                    Side::Value(r) => neighbours.push(*r),
                    Side::Nothing => {}
                    Side::TooBig => checked_both = false,
                }
            }
            largest_neighbour = neighbours
                .into_iter()
                .max_by(|a, b| a.ln_lambda.total_cmp(&b.ln_lambda));
            let tolerance = self.tolerance(&best);
            match &largest_neighbour {
                Some(up) if up.ln_lambda > best.ln_lambda + tolerance && moves < 64 => {
                    q = up.sector.unwrap_or(q);
                    best = up.clone();
                    moves += 1;
                }
                _ => break,
            }
        }
        if checked_both {
            if let Some(n) = &largest_neighbour {
                let check = self.check(Route::NeighbourSectors { width }, &best, n);
                self.checks.push(check);
            }
            self.push_checked(layout, width, q);
            best.basis = SectorBasis::LocalMaximum;
        } else {
            best.basis = SectorBasis::Predicted {
                checked_to: self.checked.iter().map(|c| c.width).max().unwrap_or(0),
            };
        }
        Ok(best)
    }

    /// One charge from the cache, computing it (with at most `max_boundary` boundary
    /// states) when it is missing or was too big for a smaller cap.
    fn cached<'c>(
        &self,
        cache: &'c mut HashMap<i64, Eval>,
        layout: &Column,
        charge: i64,
        max_boundary: usize,
    ) -> Result<&'c Eval> {
        let stale = match cache.get(&charge) {
            None => true,
            Some(Eval::TooBig(cap)) => *cap < max_boundary,
            Some(_) => false,
        };
        if stale {
            let e = self.evaluate(layout, charge, max_boundary)?;
            cache.insert(charge, e);
        }
        Ok(&cache[&charge])
    }

    /// The nearest non-empty charge on one side of q (mirror images of q under reversal
    /// count as checked: their λ equals q's).
    fn neighbour(
        &mut self,
        cache: &mut HashMap<i64, Eval>,
        layout: &Column,
        q: i64,
        dir: i64,
        low: i64,
        high: i64,
    ) -> Result<Side> {
        let total = layout.total_charge();
        let cap = NEIGHBOUR_STATES;
        for d in 1..=NEIGHBOUR_GAP {
            let c = q + dir * d;
            if c < low || c > high || (layout.charge_sign == -1 && c < 0) {
                return Ok(Side::Nothing);
            }
            // Reversal maps charge c to Σc − c with the same λ: the mirror of q is equal, and
            // the mirror of the other side's neighbour is computed there.
            if layout.reversible && layout.charge_sign == 1 {
                let mirror = total - c;
                if mirror == q {
                    return Ok(Side::Nothing);
                }
                if dir == -1 && 2 * q == total {
                    return Ok(Side::Nothing);
                }
            }
            match self.cached(cache, layout, c, cap)? {
                Eval::Empty => continue,
                Eval::TooBig(_) => return Ok(Side::TooBig),
                Eval::Value(r) => return Ok(Side::Value(r.clone())),
            }
        }
        Ok(Side::Nothing)
    }

    /// The largest eigenvalue of one charge with at most `max_boundary` boundary states.
    fn evaluate(&self, layout: &Column, charge: i64, max_boundary: usize) -> Result<Eval> {
        let mut column = layout.uncompiled(Kept::Charge(charge))?;
        match column.compile_states(self.config, max_boundary) {
            Ok(true) => {}
            Ok(false) => return Ok(Eval::Empty),
            Err(Error::Budget { .. }) if max_boundary < usize::MAX => {
                return Ok(Eval::TooBig(max_boundary));
            }
            Err(e) => return Err(e),
        }
        Ok(match column.iterate(self.config)? {
            Some((r, _)) => Eval::Value(Box::new(r)),
            None => Eval::Empty,
        })
    }

    /// The charges predicted for a width from the checked ones: the reversal-symmetric
    /// charge when every checked width had it; else the value of a least-squares line
    /// q = a W + b through the checked widths from 4 on (all of them when fewer than three
    /// are that wide), rounded when it lies within [`AMBIGUOUS`] of an integer, else the
    /// two integers around it.
    fn predict(&self, layout: &Column) -> Vec<i64> {
        let total = layout.total_charge();
        if layout.charge_sign == 1 && layout.reversible && self.checked.iter().all(|c| c.centre) {
            return vec![total.div_euclid(2)];
        }
        let wide: Vec<&Checked> = self.checked.iter().filter(|c| c.width >= 4).collect();
        let points: Vec<&Checked> = if wide.len() >= 3 {
            wide
        } else {
            self.checked.iter().collect()
        };
        let n = points.len() as f64;
        let (sw, sq): (f64, f64) = points.iter().fold((0.0, 0.0), |(a, b), c| {
            (a + c.width as f64, b + c.charge as f64)
        });
        let (mw, mq) = (sw / n, sq / n);
        let (mut sxy, mut sxx) = (0.0, 0.0);
        for c in &points {
            let dx = c.width as f64 - mw;
            sxy += dx * (c.charge as f64 - mq);
            sxx += dx * dx;
        }
        let w = layout.width as f64;
        let predicted = if sxx > 0.0 {
            mq + sxy / sxx * (w - mw)
        } else {
            mq * w / mw.max(1.0)
        };
        // Near an integer, that one; otherwise both neighbours (the larger λ is kept).
        let nearest = predicted.round();
        if (predicted - nearest).abs() <= AMBIGUOUS {
            vec![nearest as i64]
        } else {
            vec![predicted.floor() as i64, predicted.ceil() as i64]
        }
    }

    fn push_checked(&mut self, layout: &Column, width: usize, charge: i64) {
        let total = layout.total_charge();
        self.checked.push(Checked {
            width,
            charge,
            centre: (2 * charge - total).abs() <= 1,
        });
    }

    /// The agreement allowed between two eigenvalues of one width: both are converged to
    /// the iteration tolerance (relative in λ), and each lies in its bracket.
    fn tolerance(&self, r: &StripResult) -> f64 {
        4.0 * self.config.tolerance + (r.ln_bracket.1 - r.ln_bracket.0).abs()
    }

    /// A cross-check of the kept sector's λ against another route at the same width, per
    /// formula unit.
    fn check(&self, route: Route, kept: &StripResult, other: &StripResult) -> CrossCheck {
        let tolerance = self.tolerance(kept) + self.tolerance(other);
        CrossCheck {
            method: Method::TransferMatrix,
            route,
            value: kept.ln_w_per_unit,
            reference: other.ln_w_per_unit,
            tolerance: tolerance / kept.units_per_column,
        }
    }
}

/// One side of a sector in the search.
enum Side {
    /// No charge on that side (the end of the range, or a mirror image).
    Nothing,
    /// The nearest charge on that side needs more states than allowed for a check.
    TooBig,
    /// The nearest non-empty charge on that side.
    Value(Box<StripResult>),
}

/// The largest eigenvalue of a compiled column.
fn eigen(column: &Column, config: &StripConfig) -> Result<StripResult> {
    column.largest_eigenvalue(config)
}
