//! The weighted transfer operator: every transition carries the product of the weights of
//! the values it adds, and the entropy of the weighted ensemble, with imposed means solved
//! for their conjugate fields (fixed density by the Legendre transform).
//!
//! # What it computes
//!
//! With relative weights w_v(s) on the states of the variables (`weights:`) and fields h_j
//! on imposed means (`occupancy:`, `composition:`), an arrangement σ weighs
//! w(σ) = Π_v w_v(σ_v)^t · exp(Σ_j h_j n_j(σ)) (t = 1; the scale t is the handle for the
//! derivative), and the largest eigenvalue λ(t, h) of the weighted column operator gives
//! ln Z per formula unit = ln λ / (formula units per column). The entropy of the weighted
//! ensemble per formula unit is S/R = ln Z − ⟨ln w⟩ with ⟨ln w⟩ = ∂_t ln λ + Σ_j h_j
//! ∂_{h_j} ln λ, and the means reached are ⟨n_j⟩ = ∂_{h_j} ln λ per column. With means
//! imposed, the fields solve ⟨n_j⟩ = target · N_j at every width
//! ([`crate::counters::fields::solve`]), so the entropy is that of the maximum-entropy
//! ensemble with those means — for a `composition:` of the infinite crystal, the Legendre
//! transform of ln Z in the field.
//!
//! # Method
//!
//! The rows of every step are compiled once per width and sector, each entry with the
//! index of the value pattern the transition adds ([`super::rows::Rows`] keeps it beside
//! the input index; repeated paths stay separate entries and add). A point (t, h) only
//! refills the small table of factors per pattern ([`Column::set_point`]), so the eigenvalue
//! at many points costs one power iteration each. Charge sectors are those of the
//! unweighted rule; which sector holds the largest eigenvalue is searched at the fields
//! found and compared with the sector the fields were solved in (solved again when it
//! differs). Reversal pairs are kept only when every weight is the same for both states and
//! no mean is imposed.
//!
//! The derivatives are central differences of ln λ (the five-point stencil, step
//! [`STEP`]), whose error is bounded by |D₄ − D₂| (the two-point difference of the same
//! step, a larger truncation error) plus the rounding 1.5 ε / δ with ε the iteration's
//! tolerance (ln λ is converged to ε): about 1e-9 per column for smooth ln λ. That bound
//! joins each width's error in the extrapolation.
//!
//! # Complexity
//!
//! Compiling as the unweighted operator (plus one byte per transition); per width, one
//! sector search at h = 0 and one at the fields found, and per evaluation of the means
//! 1 + 4m eigenvalues (m imposed means), a few Newton steps of m + 2 evaluations each.

use rayon::prelude::*;

use super::column::{Column, ColumnStep};
use super::dominant::Finder;
use super::rows::{self, Rows};
use super::{Kept, Sectors, StripConfig, StripResult};
use crate::counters::fields::{self, AtFields, FieldsConfig};
use crate::counters::frontier::payload::{Accumulator, Overflow, Payload};
use crate::counters::frontier::step::Step;
use crate::counters::frontier::{Frontier, Piece};
use crate::error::{Error, Result};
use crate::model::Model;

/// Step of the central differences in the scale t and the fields h (common practice: about
/// ε^(1/5) for a five-point stencil with ε ≈ 1e-12, here rounded up to keep the rounding
/// term near 1e-9).
pub const STEP: f64 = 1e-3;

/// What a weighted width reports beside its entropy.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct WidthWeighing {
    /// ln Z per formula unit (ln λ at the fields found, per formula unit).
    pub ln_z_per_unit: f64,
    /// ⟨ln w⟩ per formula unit, the fields' h·⟨n⟩ included.
    pub mean_ln_w_per_unit: f64,
    /// The conjugate field of every imposed mean, in the crystal's order.
    pub fields: Vec<f64>,
    /// The mean reached for every imposed mean (fraction of its variables).
    pub achieved: Vec<f64>,
    /// A bound on the error of the entropy per formula unit from the differences.
    pub derivative_error: f64,
}

/// The variables one step adds: (offset, states) of each, and their kinds.
pub(crate) type Added = (Vec<(u32, u32)>, Vec<usize>);

/// The weights of a column's values, per kind (place within a column).
#[derive(Debug)]
pub(crate) struct Weighting {
    /// Per kind, the weight of each state (1 without `weights:`).
    weights: Vec<Vec<f64>>,
    /// Per kind, per imposed mean, the state the mean counts when the kind is among its
    /// variables.
    counted: Vec<Vec<Option<u32>>>,
    /// Per step, per value pattern, the (kind, value) of every added variable.
    added: Vec<Vec<Vec<(usize, u32)>>>,
    /// Kinds that no constraint reads (a factor Σ_s of their own).
    free: Vec<usize>,
    /// Per imposed mean, its variables per column.
    pub per_column: Vec<f64>,
    /// Per imposed mean, the target (a fraction of its variables).
    pub targets: Vec<f64>,
}

impl Weighting {
    /// From the strip cluster's model: `kinds[v]` is the kind of variable v, `states[k]`
    /// the states of kind k, `added[s]` the (offset, states) and kinds of the variables
    /// step s adds, `n` the columns of the cluster.
    pub fn new(
        model: &Model,
        kinds: &[usize],
        states: &[u32],
        steps: &[ColumnStep],
        added: &[Added],
        free: Vec<usize>,
        n: usize,
    ) -> Weighting {
        let m = states.len();
        let mut weights: Vec<Vec<f64>> = states.iter().map(|&q| vec![1.0; q as usize]).collect();
        for (v, &k) in kinds.iter().enumerate() {
            for (s, w) in weights[k].iter_mut().enumerate() {
                *w = model.weight(v, s as u32);
            }
        }
        let mut counted = vec![vec![None; model.means.len()]; m];
        for (j, mean) in model.means.iter().enumerate() {
            for &v in &mean.variables {
                counted[kinds[v]][j] = Some(mean.state);
            }
        }
        let per_column = model
            .means
            .iter()
            .map(|mean| mean.variables.len() as f64 / n as f64)
            .collect();
        let added = steps
            .iter()
            .zip(added)
            .map(|(s, (offsets, ks))| {
                s.step
                    .patterns()
                    .iter()
                    .map(|&p| {
                        offsets
                            .iter()
                            .zip(ks)
                            .map(|(&(off, q), &k)| {
                                let mask = crate::counters::frontier::layout::mask(
                                    crate::counters::frontier::layout::width(q),
                                );
                                (k, ((p >> off) & mask) as u32)
                            })
                            .collect()
                    })
                    .collect()
            })
            .collect();
        Weighting {
            weights,
            counted,
            added,
            free,
            per_column,
            targets: model.means.iter().map(|mean| mean.mean).collect(),
        }
    }

    /// Whether reversing every binary variable keeps every weight: both states of every
    /// kind weigh the same and no mean is imposed.
    pub fn reversal_invariant(&self) -> bool {
        self.per_column.is_empty() && self.weights.iter().all(|w| w.iter().all(|&x| x == w[0]))
    }

    /// The factor of kind k at value s at the point (t, h): w^t · exp(Σ_j h_j [counted]).
    fn factor(&self, k: usize, s: u32, t: f64, h: &[f64]) -> f64 {
        let w = self.weights[k][s as usize];
        let w = if t == 1.0 { w } else { w.powf(t) };
        let field: f64 = self.counted[k]
            .iter()
            .zip(h)
            .filter(|(c, _)| **c == Some(s))
            .map(|(_, h)| h)
            .sum();
        if field == 0.0 { w } else { w * field.exp() }
    }
}

impl Column {
    /// Set the point (t, h) of a weighted column: the factor of every value pattern of
    /// every step and the factor of the variables no rule reads. Nothing for an unweighted
    /// column. `h` may be shorter than the means (missing fields are 0).
    pub(super) fn set_point(&mut self, t: f64, h: &[f64]) {
        let Some(w) = self.weighting.clone() else {
            return;
        };
        let mut h = h.to_vec();
        h.resize(w.per_column.len(), 0.0);
        self.factors = w
            .added
            .iter()
            .map(|patterns| {
                patterns
                    .iter()
                    .map(|values| {
                        values
                            .iter()
                            .map(|&(k, s)| w.factor(k, s, t, &h))
                            .product::<f64>()
                    })
                    .collect()
            })
            .collect();
        let free: f64 = w
            .free
            .iter()
            .map(|&k| {
                (0..w.weights[k].len() as u32)
                    .map(|s| w.factor(k, s, t, &h))
                    .sum::<f64>()
            })
            .product();
        self.ln_free = free.ln();
    }

    /// Variables of each imposed mean per column (empty when unweighted or none imposed).
    pub(super) fn mean_sizes(&self) -> Vec<f64> {
        self.weighting
            .as_ref()
            .map_or(Vec::new(), |w| w.per_column.clone())
    }

    /// The rows of every step of a weighted column, from the boundary states `keys`: as
    /// [`Column::compile`]'s unweighted rows, each entry with the value pattern its
    /// transition adds.
    pub(super) fn compile_weighted_rows(
        &mut self,
        keys: Vec<u64>,
        config: &StripConfig,
    ) -> Result<()> {
        let mut all_rows = Vec::with_capacity(self.steps.len());
        let mut sizes = Vec::with_capacity(self.steps.len());
        let last = self.steps.len().saturating_sub(1);
        let too_many = |n: usize| Error::Budget {
            cells: format!("a strip {} cells wide", self.width),
            detail: format!("a column step has {n} transitions"),
        };
        let reversal = self.flip.is_some();
        let parts = crate::counters::frontier::ways(keys.len());
        let size = keys.len().div_ceil(parts.max(1)).max(1);
        let mut frontier = Frontier::new(
            keys.chunks(size)
                .enumerate()
                .map(|(i, c)| Piece {
                    keys: c.to_vec(),
                    payload: WeightedIndices {
                        first: (i * size) as u32,
                    },
                })
                .collect(),
        );
        let mut built: Vec<Piece<WeightedRowBuilder>> = Vec::new();
        for (s, column_step) in self.steps.iter().enumerate() {
            let step = &column_step.step;
            let inputs = frontier.len();
            let (rows, outputs) = if s == last {
                let (sources, patterns, starts) =
                    self.closing_weighted_rows(step, &frontier, &keys)?;
                if sources.len() >= u32::MAX as usize {
                    return Err(too_many(sources.len()));
                }
                (
                    Rows::from_compressed_weighted(&sources, &patterns, &starts),
                    keys.len(),
                )
            } else {
                frontier
                    .step(step, reversal, &mut built)
                    .expect("indices carry nothing that overflows");
                let total: usize = built.iter().map(|p| p.payload.sources.len()).sum();
                if total >= u32::MAX as usize {
                    return Err(too_many(total));
                }
                let outputs = built.iter().map(Piece::len).sum();
                let rows = Rows::from_pieces_weighted(built.iter().map(|p| {
                    (
                        &p.payload.sources[..],
                        &p.payload.patterns[..],
                        &p.payload.starts[..],
                    )
                }));
                let mut first = 0u32;
                frontier.pieces = built
                    .iter_mut()
                    .map(|p| {
                        let piece = Piece {
                            keys: std::mem::take(&mut p.keys),
                            payload: WeightedIndices { first },
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

    /// The last step's weighted rows as (sources, patterns, starts): every successor is
    /// relabelled and looked up in `keys`; its pattern is read back from the added bits.
    fn closing_weighted_rows(
        &self,
        step: &Step,
        frontier: &Frontier<WeightedIndices>,
        keys: &[u64],
    ) -> Result<(Vec<u32>, Vec<u8>, Vec<u32>)> {
        let patterns = step.patterns();
        let added = patterns.iter().fold(0u64, |a, &p| a | p);
        let targets_of = |piece: &Piece<WeightedIndices>| -> Result<Vec<(u32, u32, u8)>> {
            let mut targets = Vec::new();
            for (i, &key) in piece.keys.iter().enumerate() {
                let input = piece.payload.item(i).0;
                let mut open = false;
                step.successors(key, |k| {
                    let p = patterns
                        .binary_search(&(k & added))
                        .expect("a successor holds one of the step's patterns");
                    let out = self.relabelled(step.forget(k));
                    let out = self.flip.map_or(out, |m| out.min(out ^ m));
                    match keys.binary_search(&out) {
                        Ok(j) => targets.push((j as u32, input, p as u8)),
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
        let parts: Vec<Vec<(u32, u32, u8)>> = if frontier.pieces.len() > 1 {
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
        let mut starts = vec![0u32; keys.len() + 1];
        for &(j, _, _) in parts.iter().flatten() {
            starts[j as usize + 1] += 1;
        }
        for j in 0..keys.len() {
            starts[j + 1] += starts[j];
        }
        let mut fill = starts.clone();
        let mut sources = vec![0u32; total];
        let mut pats = vec![0u8; total];
        for &(j, i, p) in parts.iter().flatten() {
            let at = fill[j as usize] as usize;
            sources[at] = i;
            pats[at] = p;
            fill[j as usize] += 1;
        }
        Ok((sources, pats, starts))
    }
}

/// Input states known by their index, handing on the value pattern of each transition.
#[derive(Clone, Copy, Debug, Default)]
pub(crate) struct WeightedIndices {
    /// Global index of the piece's first state.
    pub first: u32,
}

impl Payload for WeightedIndices {
    type Item = (u32, u8);
    #[inline]
    fn item(&self, i: usize) -> (u32, u8) {
        (self.first + i as u32, 0)
    }
    #[inline]
    fn item_at(&self, i: usize, pattern: usize) -> (u32, u8) {
        (self.first + i as u32, pattern as u8)
    }
}

/// The weighted rows of a step: for every output key its (input, pattern) entries in
/// increasing order, as compressed rows.
#[derive(Clone, Debug, Default)]
pub(crate) struct WeightedRowBuilder {
    /// The inputs of every row, one row after the other.
    pub sources: Vec<u32>,
    /// The value pattern of every entry.
    pub patterns: Vec<u8>,
    /// Where every row starts.
    pub starts: Vec<u32>,
}

impl Accumulator<(u32, u8)> for WeightedRowBuilder {
    fn clear(&mut self) {
        self.sources.clear();
        self.patterns.clear();
        self.starts.clear();
    }
    #[inline]
    fn first(&mut self, &(i, p): &(u32, u8)) -> std::result::Result<(), Overflow> {
        self.starts.push(self.sources.len() as u32);
        self.sources.push(i);
        self.patterns.push(p);
        Ok(())
    }
    /// Insertion keeps the entries sorted by (input, pattern), whatever the split.
    #[inline]
    fn again(&mut self, &(i, p): &(u32, u8)) -> std::result::Result<(), Overflow> {
        let start = *self.starts.last().expect("a row was started") as usize;
        let at = start
            + (start..self.sources.len())
                .take_while(|&e| (self.sources[e], self.patterns[e]) <= (i, p))
                .count();
        self.sources.insert(at, i);
        self.patterns.insert(at, p);
        Ok(())
    }
}

/// The kept states that a width's result came from.
fn kept_of(r: &StripResult, layout: &Column, config: &StripConfig) -> Kept {
    match r.sector {
        Some(q) => Kept::Charge(q),
        None if layout.charge.is_empty() && config.sectors != Sectors::Full => Kept::Reduced,
        None => Kept::Full,
    }
}

/// ln λ of a compiled weighted column at (t, h).
fn ln_lambda(column: &mut Column, t: f64, h: &[f64], config: &StripConfig) -> Result<f64> {
    column.set_point(t, h);
    Ok(column.largest_eigenvalue(config)?.ln_lambda)
}

/// The derivative of `f` at x by the five-point stencil of step [`STEP`], and a bound on
/// its error: |D₄ − D₂| plus the rounding 1.5 ε / δ of values converged to ε.
fn derivative(mut f: impl FnMut(f64) -> Result<f64>, x: f64, epsilon: f64) -> Result<(f64, f64)> {
    let d = STEP;
    let (p1, m1, p2, m2) = (f(x + d)?, f(x - d)?, f(x + 2.0 * d)?, f(x - 2.0 * d)?);
    let d2 = (p1 - m1) / (2.0 * d);
    let d4 = (8.0 * (p1 - m1) - (p2 - m2)) / (12.0 * d);
    Ok((d4, (d4 - d2).abs() + 1.5 * epsilon / d))
}

/// The means per column at h (∂ ln λ / ∂h_j), with their error bounds.
fn means_at(column: &mut Column, h: &[f64], config: &StripConfig) -> Result<(Vec<f64>, Vec<f64>)> {
    let mut values = Vec::with_capacity(h.len());
    let mut errors = Vec::with_capacity(h.len());
    for j in 0..h.len() {
        let (v, e) = derivative(
            |x| {
                let mut hj = h.to_vec();
                hj[j] = x;
                ln_lambda(column, 1.0, &hj, config)
            },
            h[j],
            config.tolerance,
        )?;
        values.push(v);
        errors.push(e);
    }
    Ok((values, errors))
}

/// Settings of the field solver for eigenvalue routines: means are differences of ln λ,
/// good to about 1e-9, so the targets are asked to 1e-7.
fn fields_config() -> FieldsConfig {
    FieldsConfig {
        tolerance: 1e-7,
        max_iterations: 60,
        step: 1e-4,
    }
}

/// Sector searches at new fields before giving up on a sector that keeps moving.
const SECTOR_ROUNDS: usize = 4;

/// One width of a weighted crystal: the sector of the largest eigenvalue, the fields of the
/// imposed means solved on it (and the sector checked again at those fields), and the
/// entropy of the weighted ensemble with its derivative error.
/// A field solve that failed in a charge sector: the fields ran off (the eigenvalue
/// vanished) or stopped short of the targets. Within one sector a mean on a quantity the
/// operator conserves (the flux of arrows along the strip) takes a single value, so such a
/// target is out of reach at this width whatever the field; say so instead of the words of
/// the failure it caused.
fn unreachable_means(e: Error, width: usize) -> Error {
    match e {
        Error::Model(_) | Error::NotConverged { .. } => Error::Model(format!(
            "the imposed means cannot be reached on a strip {width} cells wide ({e}); a mean \
             on a quantity the strip conserves (such as the flux of arrows along the strip) \
             takes one value per charge sector at each width, so count growing cells exactly \
             instead"
        )),
        e => e,
    }
}

pub(super) fn width(
    finder: &mut Finder,
    width: usize,
    config: &StripConfig,
) -> Result<StripResult> {
    finder.point = None;
    let before = finder.checks.len();
    let mut found = finder.width(width)?;
    let layout = finder.layout(width)?;
    let sizes = layout.mean_sizes();
    let targets: Vec<f64> = layout
        .weighting
        .as_ref()
        .map(|w| w.targets.clone())
        .unwrap_or_default();
    let mut h = vec![0.0; sizes.len()];
    let mut column = layout.compiled(kept_of(&found, &layout, config), config)?;
    if !sizes.is_empty() {
        let mut settled = false;
        for _ in 0..SECTOR_ROUNDS {
            let solved = fields::solve(&targets, &sizes, &fields_config(), |h| {
                let ln_z = ln_lambda(&mut column, 1.0, h, config)?;
                let (means, _) = means_at(&mut column, h, config)?;
                Ok(AtFields {
                    ln_z,
                    means: means.iter().zip(&sizes).map(|(m, n)| m / n).collect(),
                })
            })
            .map_err(|e| unreachable_means(e, width))?;
            h = solved.fields;
            // The sector of the largest eigenvalue at the fields found (the checks made at
            // other fields are not about the values reported).
            finder.checks.truncate(before);
            finder.point = Some(h.clone());
            let again = finder.width(width)?;
            let same = again.sector == found.sector;
            found = again;
            if same {
                settled = true;
                break;
            }
            let layout = finder.layout(width)?;
            column = layout.compiled(kept_of(&found, &layout, config), config)?;
        }
        if !settled {
            return Err(Error::Sector {
                width,
                why: format!(
                    "the charge sector of the largest eigenvalue of a strip {width} cells wide \
                     moved each time the fields of the imposed means were solved in it"
                ),
            });
        }
    }
    let u = column.units_per_column;
    let ln_l = ln_lambda(&mut column, 1.0, &h, config)?;
    let (d_t, e_t) = derivative(
        |t| ln_lambda(&mut column, t, &h, config),
        1.0,
        config.tolerance,
    )?;
    let (means, errors) = means_at(&mut column, &h, config)?;
    column.set_point(1.0, &h);
    let field_term: f64 = h.iter().zip(&means).map(|(h, m)| h * m).sum();
    let field_error: f64 = h.iter().zip(&errors).map(|(h, e)| h.abs() * e).sum();
    let mean_ln_w = d_t + field_term;
    let mut r = found;
    r.ln_lambda = ln_l;
    r.ln_w_per_unit = (ln_l - mean_ln_w) / u;
    r.weighing = Some(WidthWeighing {
        ln_z_per_unit: ln_l / u,
        mean_ln_w_per_unit: mean_ln_w / u,
        fields: h,
        achieved: means.iter().zip(&sizes).map(|(m, n)| m / n).collect(),
        derivative_error: (e_t + field_error) / u,
    });
    Ok(r)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Lattice;
    use crate::context::Context;
    use crate::counters::transfer::{count, strip};
    use std::f64::consts::PI;

    /// A shipped lattice with `extra` appended (weights, means).
    fn lattice(name: &str, extra: &str) -> Lattice {
        let path = format!("{}/lattices/{name}", env!("CARGO_MANIFEST_DIR"));
        let text = std::fs::read_to_string(&path).unwrap() + extra;
        Lattice::from_yaml(&text, name).unwrap()
    }

    /// (1/π) ∫₀^{π/2} f(θ) dθ by the midpoint rule (f smooth and periodic-like: the error is
    /// far below the tolerances used).
    fn quadrature(f: impl Fn(f64) -> f64) -> f64 {
        let n = 20_000;
        let h = 0.5 * PI / n as f64;
        (0..n).map(|i| f((i as f64 + 0.5) * h)).sum::<f64>() * h / PI
    }

    /// Square-lattice dimers with activity z on horizontal dimers: ln Z per site =
    /// (1/π) ∫₀^{π/2} asinh(z cos θ) dθ (Kasteleyn 1961, Physica 27, 1209; Fisher 1961,
    /// Phys. Rev. 124, 1664: from the product over (θ, φ) of 4z² cos²θ + 4 cos²φ, the φ
    /// integral done in closed form), and the fraction of horizontal bonds occupied
    /// ρ = z ∂_z ln Z per site.
    fn kasteleyn_fisher(z: f64) -> (f64, f64) {
        (
            quadrature(|t| (z * t.cos()).asinh()),
            quadrature(|t| z * t.cos() / (1.0 + (z * t.cos()).powi(2)).sqrt()),
        )
    }

    #[test]
    fn issue13_kasteleyn_fisher_normalisation_gives_catalan_over_pi() {
        // z = 1: G/π with G = 0.915965594177219 (Catalan's constant, from memory), and a
        // quarter of the sites' bonds horizontal by symmetry.
        let (ln_z, rho) = kasteleyn_fisher(1.0);
        assert!((ln_z - 0.915965594177219 / PI).abs() < 1e-9, "{ln_z}");
        assert!((rho - 0.25).abs() < 1e-9, "{rho}");
    }

    #[test]
    fn issue13_weighted_dimers_match_kasteleyn_fisher() {
        let z: f64 = 2.0;
        let l = lattice(
            "square-dimers.yaml",
            "weights:\n  - {bond: h, states: [1, 2.0]}\n",
        );
        let config = StripConfig {
            widths: (2..=12).collect(),
            ..Default::default()
        };
        let s = count(&l.crystal, &config, &Context::new()).unwrap();
        let (ln_z, rho) = kasteleyn_fisher(z);
        let e = &s.estimate;
        let w = e.weighing.as_ref().unwrap();
        let sigma = e.sigma_ln_w.unwrap();
        assert!(sigma < 1e-4, "{sigma}");
        // The entropy of the weighted ensemble, S/R = ln Z − ρ ln z per site.
        let entropy = ln_z - rho * z.ln();
        assert!(
            (e.ln_w_per_unit - entropy).abs() < 3.0 * sigma,
            "{} ± {sigma} against {entropy}",
            e.ln_w_per_unit
        );
        assert!(
            (w.ln_z_per_unit - ln_z).abs() < 3.0 * sigma,
            "{}",
            w.ln_z_per_unit
        );
        assert!(s.details.checks_agree() && !s.details.checks.is_empty());
        // Every width: S = ln Z − ⟨ln w⟩ with ⟨ln w⟩ = ρ_W ln z, ρ_W between 1/4 and 1/2.
        for r in &s.details.widths {
            let ww = r.weighing.as_ref().unwrap();
            assert!(ww.derivative_error < 1e-7, "{}", ww.derivative_error);
            let rho_w = ww.mean_ln_w_per_unit / z.ln();
            assert!(rho_w > 0.25 && rho_w < 0.5, "{rho_w}");
        }
    }

    #[test]
    fn issue13_dimers_at_a_horizontal_fraction_are_the_legendre_transform() {
        let x = 0.3;
        let l = lattice(
            "square-dimers.yaml",
            "composition:\n  - {bonds: [h], state: 1, fraction: 0.3}\n",
        );
        let config = StripConfig {
            widths: (2..=12).collect(),
            ..Default::default()
        };
        let s = count(&l.crystal, &config, &Context::new()).unwrap();
        // The activity with ρ(z) = x by bisection on the quadrature, then S = ln Z − x ln z.
        let (mut lo, mut hi) = (1.0f64, 10.0f64);
        for _ in 0..60 {
            let mid = 0.5 * (lo + hi);
            if kasteleyn_fisher(mid).1 < x {
                lo = mid
            } else {
                hi = mid
            }
        }
        let z = 0.5 * (lo + hi);
        let entropy = kasteleyn_fisher(z).0 - x * z.ln();
        let e = &s.estimate;
        let sigma = e.sigma_ln_w.unwrap();
        assert!(sigma < 1e-4, "{sigma}");
        assert!(
            (e.ln_w_per_unit - entropy).abs() < 3.0 * sigma,
            "{} ± {sigma} against {entropy}",
            e.ln_w_per_unit
        );
        let f = &e.weighing.as_ref().unwrap().fields[0];
        assert!((f.achieved - x).abs() < 1e-7, "{}", f.achieved);
        assert!(
            (f.field - z.ln()).abs() < 1e-3,
            "{} against ln z = {}",
            f.field,
            z.ln()
        );
        for r in &s.details.widths {
            assert!((r.weighing.as_ref().unwrap().achieved[0] - x).abs() < 1e-7);
        }
    }

    #[test]
    fn issue13_unit_weights_give_the_unweighted_values_exactly() {
        // Square ice keeps its sector and reversal pairs; hard squares keep neither.
        for (name, extra) in [
            (
                "square-ice.yaml",
                "weights:\n  - {bond: h, states: [1, 1]}\n",
            ),
            (
                "hard-squares.yaml",
                "weights:\n  - {site: P, states: [1, 1]}\n",
            ),
        ] {
            let plain = lattice(name, "");
            let weighted = lattice(name, extra);
            assert!(weighted.crystal.is_weighted());
            let config = StripConfig {
                widths: (2..=8).collect(),
                ..Default::default()
            };
            let a = count(&plain.crystal, &config, &Context::new()).unwrap();
            let b = count(&weighted.crystal, &config, &Context::new()).unwrap();
            for (x, y) in a.details.widths.iter().zip(&b.details.widths) {
                assert_eq!(x.ln_lambda, y.ln_lambda, "{name} width {}", x.width);
                assert_eq!(x.ln_w_per_unit, y.ln_w_per_unit, "{name} width {}", x.width);
                assert_eq!(x.reversal, y.reversal, "{name}");
                assert_eq!(x.sector, y.sector, "{name}");
                let w = y.weighing.as_ref().unwrap();
                assert_eq!(w.mean_ln_w_per_unit, 0.0);
            }
            assert_eq!(a.estimate.ln_w_per_unit, b.estimate.ln_w_per_unit, "{name}");
        }
    }

    /// The density of hard squares at activity 1, per site, at one width: ∂ ln λ / ∂h at
    /// h = 0 on the operator of a file with a composition entry.
    fn free_density(l: &Lattice, width: usize, config: &StripConfig) -> f64 {
        let layout = Column::layout(&l.crystal, width, config).unwrap();
        let mut column = layout.compiled(Kept::Reduced, config).unwrap();
        let (m, _) = means_at(&mut column, &[0.0], config).unwrap();
        m[0] / column.mean_sizes()[0]
    }

    #[test]
    fn issue13_hard_squares_at_their_free_density_give_baxters_constant() {
        let config = StripConfig {
            widths: (4..=14).collect(),
            ..Default::default()
        };
        let probe = lattice(
            "hard-squares.yaml",
            "composition:\n  - {sites: [P], state: 1, fraction: 0.2}\n",
        );
        let rho = free_density(&probe, 14, &config);
        assert!(rho > 0.2 && rho < 0.25, "{rho}");
        let l = lattice(
            "hard-squares.yaml",
            &format!("composition:\n  - {{sites: [P], state: 1, fraction: {rho:.15}}}\n"),
        );
        let s = count(&l.crystal, &config, &Context::new()).unwrap();
        // κ = 1.5030480824753323 per site: Baxter, Enting & Tsang 1980, J. Stat. Phys. 22,
        // 465 (the unweighted hard-square constant); the field vanishes there.
        let kappa = 1.5030480824753323f64.ln();
        let e = &s.estimate;
        assert!(
            (e.ln_w_per_unit - kappa).abs() < 1e-7,
            "{} against {kappa}",
            e.ln_w_per_unit
        );
        let f = &e.weighing.as_ref().unwrap().fields[0];
        // The field extrapolated from widths 4 to 14 (its own convergence is slower).
        assert!(f.field.abs() < 1e-4, "{}", f.field);
        // At the width the density came from, the unweighted eigenvalue itself.
        let plain = strip(&lattice("hard-squares.yaml", "").crystal, 14, &config).unwrap();
        let w14 = s.details.widths.iter().find(|r| r.width == 14).unwrap();
        assert!(w14.weighing.as_ref().unwrap().fields[0].abs() < 1e-6);
        assert!(
            (w14.ln_w_per_unit - plain.ln_w_per_unit).abs() < 1e-8,
            "{} against {}",
            w14.ln_w_per_unit,
            plain.ln_w_per_unit
        );
    }

    #[test]
    fn issue13_hard_squares_at_a_fixed_density_two_legendre_routes() {
        // Route 1: the field solver at density 0.15. Route 2: the weights path at the
        // activity z = e^h it found, ln Z(z) per site at z and z(1 ± δ), the density by the
        // test's own difference z ∂_z ln Z, and S = ln Z − ρ ln z.
        let width = 10;
        let config = StripConfig::default();
        let l = lattice(
            "hard-squares.yaml",
            "composition:\n  - {sites: [P], state: 1, fraction: 0.15}\n",
        );
        let solved = strip(&l.crystal, width, &config).unwrap();
        let mut runner = super::super::Runner::new(&l.crystal, &config);
        let r = runner.width(width).unwrap().clone();
        let h = r.weighing.as_ref().unwrap().fields[0];
        assert!(
            h < 0.0,
            "{h}: a density below the free one needs a negative field"
        );
        let ln_z = |z: f64| -> f64 {
            let w = lattice(
                "hard-squares.yaml",
                &format!("weights:\n  - {{site: P, states: [1, {z:.17e}]}}\n"),
            );
            let mut runner = super::super::Runner::new(&w.crystal, &config);
            runner
                .width(width)
                .unwrap()
                .weighing
                .clone()
                .unwrap()
                .ln_z_per_unit
        };
        let z = h.exp();
        let d = 1e-4;
        let rho = (ln_z(z * (1.0 + d)) - ln_z(z * (1.0 - d))) / (2.0 * d);
        assert!((rho - 0.15).abs() < 1e-6, "{rho}");
        let entropy = ln_z(z) - 0.15 * z.ln();
        assert!(
            (r.ln_w_per_unit - entropy).abs() < 1e-7,
            "{} against {entropy}",
            r.ln_w_per_unit
        );
        // `strip` solves the same width the same way.
        assert_eq!(solved.ln_w_per_unit, r.ln_w_per_unit);
    }
}
