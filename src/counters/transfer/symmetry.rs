//! Symmetries of a column that shrink its state space: the conserved charge and the sector
//! kept, and reversal pairs.
//!
//! # Method
//!
//! [`conserved_charge`] turns the relations of the constraint tables ([`super::sector`])
//! into a charge over the boundary fields: the coefficient of a boundary field (k, a)
//! adds the signed relations of the constraints reading it that have completed, those with
//! depth − offset < a. A column that keeps one sector keeps the keys of one charge (and
//! its negative when T maps q to −q, as for dimers); when reversing every variable maps
//! the kept charges onto themselves, a key and its complement are one state (`flip`).
//! [`Column::sector_keys`] enumerates a sector directly when every boundary field carries
//! charge.
//!
//! # Complexity
//!
//! The enumeration of a sector visits its keys and the partial keys that can still reach
//! the charge: O(K · fields) for K keys.

use std::collections::HashMap;

use super::column::Column;
use super::filters::Filter;
use super::geometry::Template;
use super::{Kept, StripConfig, sector};
use crate::error::{Error, Result};
use crate::model::Model;

/// The conserved charge of a column, if the rule has one: (offset, coefficient) per
/// boundary field with a nonzero coefficient, and the sign s with which T maps charge q
/// to s·q. Empty (and 1) when the rule conserves none.
pub(super) fn conserved_charge(
    model: &Model,
    templates: &[Template],
    last_use: &[Option<(usize, usize)>],
    canonical: &HashMap<(usize, usize), u32>,
) -> (Vec<(u32, i64)>, i64) {
    let mut charge = Vec::new();
    let mut charge_sign = 1i64;
    let relations: Vec<Option<sector::Relation>> =
        model.tables.iter().map(sector::relation).collect();
    // Signs ε per constraint (all +1 for ice rules, a checkerboard for dimers) make
    // every variable's coefficients cancel; see `sector::signs`.
    if let Some(eps) = sector::signs(model, &relations) {
        // One column adds Σ ε b of its constraints to the charge; unless that is 0
        // no arrangement continues for ever (and the recurrence test will say so).
        let added: i64 = templates
            .iter()
            .filter_map(|t| {
                relations[t.table]
                    .as_ref()
                    .map(|r| eps[t.constraint] * r.constant)
            })
            .sum();
        // The charge of the next column's boundary is read with the next column's
        // signs: ε of every translate is ε times one common factor s = ±1, and T
        // maps charge q to s·q.
        let factors: Vec<Option<i64>> = templates
            .iter()
            .filter(|t| relations[t.table].is_some())
            .map(|t| t.next.map(|j| eps[j] * eps[t.constraint]))
            .collect();
        let common = factors
            .first()
            .copied()
            .flatten()
            .filter(|&f| factors.iter().all(|&g| g == Some(f)));
        if let (0, Some(f)) = (added, common) {
            charge_sign = f;
            for (k, use_) in last_use.iter().enumerate() {
                let Some((age, _)) = *use_ else {
                    continue;
                };
                for a in 1..=age {
                    let c = boundary_coefficient(templates, &relations, &eps, k, a);
                    if c != 0 {
                        charge.push((canonical[&(k, a)], c));
                    }
                }
            }
        }
    }
    (charge, charge_sign)
}

/// The charge coefficient of the boundary field of kind `k` and age `a`: the signed
/// relation coefficients of the template constraints reading it that have completed
/// (depth − offset < a).
fn boundary_coefficient(
    templates: &[Template],
    relations: &[Option<sector::Relation>],
    eps: &[i64],
    k: usize,
    a: usize,
) -> i64 {
    templates
        .iter()
        .filter_map(|t| relations[t.table].as_ref().map(|r| (t, r)))
        .flat_map(|(t, r)| {
            t.entries
                .iter()
                .zip(&r.coefficients)
                .filter(move |(e, _)| e.0 == k && t.depth - e.1 < a)
                .map(move |(_, &c)| eps[t.constraint] * c)
        })
        .sum()
}

impl Column {
    /// The first guess at the sector of the largest eigenvalue, with no history: the
    /// reversal-symmetric charge when reversing every variable maps the charge q to Σc − q
    /// (zero flux for square ice), else the charge held by the most assignments of the
    /// boundary fields; every state when no charge is conserved.
    pub(crate) fn guess(&self) -> Kept {
        if self.charge.is_empty() {
            return Kept::Reduced;
        }
        let coefficients: Vec<i64> = self.charge.iter().map(|c| c.1).collect();
        if self.charge_sign == -1 {
            return Kept::Charge(0);
        }
        if self.reversible {
            return Kept::Charge(self.total_charge().div_euclid(2));
        }
        Kept::Charge(sector::most_populous(&coefficients))
    }

    /// The smallest and largest charge a boundary key can have (for an operator that maps
    /// q to −q, the range of |q|).
    pub(super) fn charge_range(&self) -> (i64, i64) {
        let low: i64 = self.charge.iter().map(|c| c.1.min(0)).sum();
        let high: i64 = self.charge.iter().map(|c| c.1.max(0)).sum();
        if self.charge_sign == -1 {
            (0, high.max(-low))
        } else {
            (low, high)
        }
    }

    /// A copy of this layout set up to keep the states `kept`, not yet compiled.
    pub(super) fn uncompiled(&self, kept: Kept) -> Result<Column> {
        let mut column = Column {
            width: self.width,
            steps: self.steps.clone(),
            relabel: self.relabel.clone(),
            depth: self.depth,
            ln_free: self.ln_free,
            free_states: self.free_states,
            units_per_column: self.units_per_column,
            keys: Vec::new(),
            rows: Vec::new(),
            sizes: Vec::new(),
            build_seconds: self.build_seconds,
            charge: self.charge.clone(),
            sector: None,
            charge_sign: self.charge_sign,
            flip: None,
            boundary_bits: self.boundary_bits,
            reversible: self.reversible,
            filters: self.filters.clone(),
            ln_boundary_space: self.ln_boundary_space,
            weighting: self.weighting.clone(),
            factors: self.factors.clone(),
        };
        let total = self.total_charge();
        match kept {
            Kept::Full => {}
            Kept::Reduced => {
                if column.charge.is_empty() && column.reversible {
                    column.flip = Some(column.boundary_bits);
                }
            }
            Kept::Charge(q) => {
                if column.charge.is_empty() {
                    return Err(Error::Model(
                        "the rule conserves no charge across the column, so there is no sector to keep".into(),
                    ));
                }
                let q = if column.charge_sign == -1 { q.abs() } else { q };
                column.sector = Some(q);
                // Reversal maps charge q to Σc − q: pairs need the kept charges to map
                // onto themselves.
                let kept = column.kept_charges();
                let symmetric = kept.iter().all(|&c| kept.contains(&(total - c)));
                if column.reversible && symmetric {
                    column.flip = Some(column.boundary_bits);
                }
            }
        }
        Ok(column)
    }

    /// Σ of the charge coefficients (the charge of the state with every field 1).
    pub(super) fn total_charge(&self) -> i64 {
        self.charge.iter().map(|c| c.1).sum()
    }

    /// The charge values kept: q, and −q too when T maps q to −q.
    pub(super) fn kept_charges(&self) -> Vec<i64> {
        match self.sector {
            None => Vec::new(),
            Some(q) if self.charge_sign == -1 && q != 0 => vec![q, -q],
            Some(q) => vec![q],
        }
    }

    /// Whether a boundary key may be kept: of a kept charge (when a sector is kept).
    pub(super) fn in_sector(&self, key: u64) -> bool {
        match self.sector {
            None => true,
            Some(q) => {
                let c = self.charge_of(key);
                c == q || (self.charge_sign == -1 && c == -q)
            }
        }
    }

    /// The charge of a boundary key.
    pub(super) fn charge_of(&self, key: u64) -> i64 {
        self.charge
            .iter()
            .map(|&(off, c)| c * ((key >> off) & 1) as i64)
            .sum()
    }

    /// Every boundary key of charge q that the filters allow, sorted, when every boundary
    /// field is a charge field (the set is then closed under T because T keeps the charge,
    /// up to states that no completion allows).
    pub(super) fn sector_keys(
        &self,
        q: i64,
        config: &StripConfig,
        max_boundary: usize,
    ) -> Result<Vec<u64>> {
        let fields = &self.charge;
        // Smallest and largest charge the fields from i on can still add.
        let mut low = vec![0i64; fields.len() + 1];
        let mut high = vec![0i64; fields.len() + 1];
        for i in (0..fields.len()).rev() {
            low[i] = low[i + 1] + fields[i].1.min(0);
            high[i] = high[i + 1] + fields[i].1.max(0);
        }
        // The filters checked once their last field (in this order) is set.
        let position: HashMap<u32, usize> =
            fields.iter().enumerate().map(|(i, f)| (f.0, i)).collect();
        let mut due: Vec<Vec<&Filter>> = vec![Vec::new(); fields.len()];
        for f in &self.filters {
            if let Some(last) = f
                .fields
                .0
                .iter()
                .map(|x| position.get(&x.0))
                .max()
                .flatten()
            {
                due[*last].push(f);
            }
        }
        let mut keys = Vec::new();
        let mut stack = vec![(0usize, 0u64, 0i64)];
        while let Some((i, key, charge)) = stack.pop() {
            if i == fields.len() {
                keys.push(key);
                if keys.len() % 4096 == 0 || keys.len() > max_boundary {
                    self.within_budget(keys.len(), config)?;
                    if keys.len() > max_boundary {
                        return Err(Error::Budget {
                            cells: format!("a strip {} cells wide", self.width),
                            detail: format!("more than {max_boundary} boundary states"),
                        });
                    }
                }
                continue;
            }
            let (off, c) = fields[i];
            for (k, ch) in [(key, charge), (key | (1 << off), charge + c)] {
                if (low[i + 1]..=high[i + 1]).contains(&(q - ch))
                    && due[i].iter().all(|f| f.allows(k))
                {
                    stack.push((i + 1, k, ch));
                }
            }
        }
        self.within_budget(keys.len(), config)?;
        keys.sort_unstable();
        Ok(keys)
    }

    /// The weight of an eigenvector (over the boundary states) per charge, largest first;
    /// for an operator that maps q to −q, per |q|.
    pub(super) fn weight_by_charge(&self, x: &[f64]) -> Vec<(i64, f64)> {
        let mut by: HashMap<i64, f64> = HashMap::new();
        for (&k, &v) in self.keys.iter().zip(x) {
            let c = self.charge_of(k);
            let c = if self.charge_sign == -1 { c.abs() } else { c };
            *by.entry(c).or_default() += v;
        }
        let mut out: Vec<(i64, f64)> = by.into_iter().collect();
        out.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
        out
    }
}
