//! The column as frontier steps: the compiled transfer operator of one column of a strip.
//!
//! # Method
//!
//! [`Column::layout`] tiles a periodic `width × n` cluster, reads where the variables sit
//! and the template constraints ([`super::geometry`]), and compiles one column as steps of
//! the frontier engine ([`crate::counters::frontier`]) in fixed slots: the variables
//! carried over a column boundary have canonical bit fields by (kind, age in columns), a
//! variable of the new column takes the lowest free bits, and the end of a column moves
//! every surviving field one age older ([`Column::relabelled`]), so that the state space
//! repeats. A variable that completes no constraint is added together with the next one.
//! The layout also finds the conserved charge ([`super::symmetry`]), whether reversing
//! every variable is a symmetry, and the boundary filters ([`super::filters`]); the states
//! and rows are compiled later ([`super::compile`]).
//!
//! # Complexity
//!
//! Linear in the model of the `width × n` cluster, plus the projections of the filters.

use std::collections::HashMap;
use std::sync::Arc;
use std::time::Instant;

use super::filters::{Filter, local_filters};
use super::geometry::{placement, section_depth, sweep_order, templates, transverse_axes};
use super::rows::Rows;
use super::{Kept, Sectors, StripConfig, symmetry};
use crate::cluster::{Cells, Cluster};
use crate::counters::frontier::layout::{Field, Layout, width as field_width};
use crate::counters::frontier::step::{Completed, MAX_PATTERNS, Step};
use crate::crystal::Crystal;
use crate::error::{Error, Result};
use crate::model::Model;

/// One step of a column: the engine's step, and per check (in order) the columns between
/// its constraint's first column and the one it completes in.
#[derive(Clone, Debug)]
pub(super) struct ColumnStep {
    pub step: Step,
    pub depths: Vec<usize>,
}

/// The compiled transfer operator of one column of a strip.
#[derive(Debug)]
pub struct Column {
    pub(super) width: usize,
    pub(super) steps: Vec<ColumnStep>,
    /// (from offset, mask, to offset) of the fields that survive a column.
    pub(super) relabel: Vec<(u32, u64, u32)>,
    /// Largest constraint depth: columns with an open left end before the steady state.
    pub(super) depth: usize,
    /// ln of the product of the states of variables no constraint reads, per column.
    pub(super) ln_free: f64,
    /// That product.
    pub(super) free_states: u64,
    /// Formula units per column.
    pub(super) units_per_column: f64,
    /// Frontier states at a column boundary, sorted.
    pub(super) keys: Vec<u64>,
    /// Per step, the inputs of every output state (in increasing order, so sums do not
    /// depend on the number of threads).
    pub(super) rows: Vec<Rows>,
    /// Per step: number of output states.
    pub(super) sizes: Vec<usize>,
    /// Build time in seconds.
    pub(super) build_seconds: f64,
    /// (offset, coefficient) of the boundary fields in the conserved charge (empty when the
    /// rule conserves none).
    pub(super) charge: Vec<(u32, i64)>,
    /// The sector kept, if the state space is restricted to one.
    pub(super) sector: Option<i64>,
    /// T maps charge q to `charge_sign`·q (−1 when the signs of the constraints alternate
    /// from column to column, as the checkerboard of dimers does).
    pub(super) charge_sign: i64,
    /// The bits of the boundary fields.
    pub(super) boundary_bits: u64,
    /// When every state is identified with its image under reversing every binary
    /// variable, the bits of the boundary fields (XOR with them is the reversal).
    pub(super) flip: Option<u64>,
    /// Whether reversing every variable maps allowed columns to allowed columns (every
    /// frontier variable binary, every table closed under complements).
    pub(super) reversible: bool,
    /// Necessary conditions on a boundary key: the constraints it has partly read.
    pub(super) filters: Vec<Filter>,
    /// ln of the number of assignments of the boundary fields (an upper bound on the
    /// states of the full space).
    pub(super) ln_boundary_space: f64,
    /// The weights of the values every step adds, when the crystal is weighted
    /// ([`super::weighted`]).
    pub(super) weighting: Option<Arc<super::weighted::Weighting>>,
    /// Per step, the factor of every value pattern at the current point (scale and fields;
    /// empty when unweighted).
    pub(super) factors: Vec<Vec<f64>>,
}

/// Largest number of value patterns of one step when variables that complete no
/// constraint are added together with the next one.
const MERGE_MAX: usize = 64;

/// A step of the column before steps are merged: what the engine's step is compiled from.
struct Raw {
    before: u64,
    added: Vec<(u32, u32)>,
    /// The kinds of the added variables, in the order of `added`.
    kinds: Vec<usize>,
    completed: Vec<Completed>,
    depths: Vec<usize>,
    gone: Vec<Field>,
    forget: crate::counters::frontier::layout::Forget,
    occupied: u64,
}

impl Raw {
    fn patterns(&self) -> usize {
        self.added.iter().map(|a| a.1 as usize).product()
    }
}

impl Column {
    /// The layout of the column of a strip `width` cells wide — steps, fields, the
    /// conserved charge, the local filters — without any state compiled (see
    /// [`Column::compiled`]).
    pub(crate) fn layout(crystal: &Crystal, width: usize, config: &StripConfig) -> Result<Column> {
        let start = Instant::now();
        let dimensions = crystal.dimensions;
        if dimensions != 2 && dimensions != 3 {
            return Err(Error::Cells(format!(
                "a strip needs a two- or three-dimensional crystal; '{}' has {} dimension(s)",
                crystal.name, dimensions
            )));
        }
        if width == 0 || config.depth == Some(0) {
            return Err(Error::Cells("a strip must be at least 1 cell wide".into()));
        }
        let along = config.along;
        if along >= dimensions {
            return Err(Error::Cells(format!(
                "the strip axis must be {} for a {dimensions}-dimensional crystal",
                if dimensions == 2 {
                    "a or b"
                } else {
                    "a, b or c"
                }
            )));
        }
        let transverse = transverse_axes(along, dimensions);
        let depth = section_depth(dimensions, width, config);
        let reach = crystal.reach().max(1) as usize;
        // Even, so that signs alternating from column to column fit around the cluster.
        let n = 4 * reach + 4;
        let mut counts = [1usize; 3];
        counts[along] = n;
        counts[transverse[0]] = width;
        let mut periodic = [true; 3];
        periodic[transverse[0]] = config.periodic;
        if let Some(&t) = transverse.get(1) {
            counts[t] = depth;
            periodic[t] = config.periodic;
        }
        let cells = Cells {
            counts,
            periodic,
            dimensions,
        };
        let cluster = Cluster::new(crystal, cells)?;
        let model = Model::new(&cluster)?;
        if let Some(why) = &model.contradiction {
            return Err(Error::Model(format!(
                "the strip has no arrangement at all: {why}"
            )));
        }
        let place = placement(&model, along, &transverse);
        let m = place.across.len();
        // Add the variables of a column in the order its constraints need them (see
        // `sweep_order`), so that each constraint is checked as soon as possible.
        let rank = sweep_order(
            &templates(&model, &place, &place.kinds, along, n),
            &place.across,
            [width, depth],
            config.periodic,
        );
        let kinds: Vec<usize> = place.kinds.iter().map(|&k| rank[k]).collect();
        let templates = templates(&model, &place, &kinds, along, n);
        let mut states = vec![0u32; m];
        for (v, &k) in kinds.iter().enumerate() {
            states[k] = model.variables[v].states;
        }
        // Last use of each kind: (age in columns, step) of the latest completion reading it.
        let mut last_use: Vec<Option<(usize, usize)>> = vec![None; m];
        for t in &templates {
            for &(k, d) in &t.entries {
                let u = (t.depth - d, t.last);
                if last_use[k].is_none_or(|old| old < u) {
                    last_use[k] = Some(u);
                }
            }
        }
        let free_states = (0..m)
            .filter(|&k| last_use[k].is_none())
            .try_fold(1u64, |a, k| a.checked_mul(states[k] as u64))
            .ok_or_else(|| Error::Model("too many unconstrained variables per column".into()))?;
        let ln_free = (free_states as f64).ln();
        // Canonical fields of variables carried over a column boundary: (kind, age ≥ 1).
        let mut canonical: HashMap<(usize, usize), u32> = HashMap::new();
        let mut next_bit = 0u32;
        for k in 0..m {
            if let Some((age, _)) = last_use[k] {
                for a in 1..=age {
                    canonical.insert((k, a), next_bit);
                    next_bit += field_width(states[k]);
                }
            }
        }
        let too_wide = |bits: u32| Error::Budget {
            cells: format!("a strip {width} cells wide"),
            detail: format!("its column frontier needs {bits} bits, more than 63"),
        };
        if next_bit > 63 {
            return Err(too_wide(next_bit));
        }
        // The frontier variable (kind k, age a) is named a·m + k in the layout.
        let name = |k: usize, a: usize| a * m + k;
        let mut layout = Layout::slots(
            canonical
                .iter()
                .map(|(&(k, a), &offset)| Field {
                    var: name(k, a),
                    offset,
                    width: field_width(states[k]),
                })
                .collect(),
        );
        let tables: Vec<Arc<[u64]>> = model
            .tables
            .iter()
            .map(|t| Arc::from(t.bits.as_slice()))
            .collect();
        let mut fresh = vec![u32::MAX; m];
        let mut raw: Vec<Raw> = Vec::new();
        for k in 0..m {
            if last_use[k].is_none() {
                continue;
            }
            let before = layout.occupied();
            let at = layout
                .add(name(k, 0), field_width(states[k]))
                .ok_or_else(|| too_wide(64))?;
            fresh[k] = at;
            let offset = |kk: usize, age: usize| -> u32 {
                layout
                    .field(name(kk, age))
                    .expect("a field the template reads is on the frontier")
                    .offset
            };
            let (completed, depths): (Vec<Completed>, Vec<usize>) = templates
                .iter()
                .filter(|t| t.last == k)
                .map(|t| {
                    let reads = t
                        .entries
                        .iter()
                        .map(|&(kk, d)| (offset(kk, t.depth - d), states[kk]))
                        .collect();
                    let check = Completed {
                        reads,
                        table: tables[t.table].clone(),
                    };
                    (check, t.depth)
                })
                .unzip();
            let leaving: Vec<usize> = (0..m)
                .filter_map(|kk| match last_use[kk] {
                    Some((age, step)) if step == k => Some(name(kk, age)),
                    _ => None,
                })
                .collect();
            let (gone, forget) = layout.forget(&leaving);
            let mut step = Raw {
                before,
                added: vec![(at, states[k])],
                kinds: vec![k],
                completed,
                depths,
                gone,
                forget,
                occupied: layout.occupied(),
            };
            // A variable that completes no constraint only multiplies the states: add it
            // together with the next one (it forgets nothing either).
            if let Some(prev) = raw.last()
                && prev.completed.is_empty()
                && prev.patterns() * step.patterns() <= MERGE_MAX
            {
                let prev = raw.pop().expect("a previous step");
                step.before = prev.before;
                step.added = prev.added.into_iter().chain(step.added).collect();
                step.kinds = prev.kinds.into_iter().chain(step.kinds).collect();
            }
            raw.push(step);
        }
        const { assert!(MERGE_MAX <= MAX_PATTERNS) };
        let added: Vec<super::weighted::Added> = raw
            .iter()
            .map(|r| (r.added.clone(), r.kinds.clone()))
            .collect();
        let steps: Vec<ColumnStep> = raw
            .into_iter()
            .map(|r| ColumnStep {
                step: Step::new(
                    r.before,
                    0,
                    &r.added,
                    &r.completed,
                    &r.gone,
                    r.forget,
                    r.occupied,
                ),
                depths: r.depths,
            })
            .collect();
        let mut relabel = Vec::new();
        for k in 0..m {
            if let Some((age, _)) = last_use[k] {
                for a in 0..age {
                    let mask = (1u64 << field_width(states[k])) - 1;
                    let from = if a == 0 { fresh[k] } else { canonical[&(k, a)] };
                    relabel.push((from, mask, canonical[&(k, a + 1)]));
                }
            }
        }
        // The conserved charge, if the rule has one (see `symmetry`). It is found whatever
        // is kept, so that the full space can say which sector its largest eigenvector
        // lies in.
        let (charge, charge_sign) =
            symmetry::conserved_charge(&model, &templates, &last_use, &canonical);
        // Reversing every variable (arrows, spins) maps allowed columns to allowed columns
        // when every variable is binary and every table is closed under complements.
        let boundary_bits = (1u64 << next_bit) - 1;
        let binary = (0..m).all(|k| last_use[k].is_none() || states[k] == 2);
        let closed = templates.iter().all(|c| {
            let t = &model.tables[c.table];
            (0..t.size).all(|i| t.allows(i) == t.allows(t.size - 1 - i))
        });
        let weighting = model.is_weighted().then(|| {
            let free: Vec<usize> = (0..m).filter(|&k| last_use[k].is_none()).collect();
            Arc::new(super::weighted::Weighting::new(
                &model, &kinds, &states, &steps, &added, free, n,
            ))
        });
        // Weights break the reversal unless they are the same for both states of every
        // variable and no mean is imposed.
        let weights_reversible = weighting.as_ref().is_none_or(|w| w.reversal_invariant());
        let reversible = binary && closed && next_bit > 0 && weights_reversible;
        let ln_boundary_space: f64 = (0..m)
            .filter_map(|k| last_use[k].map(|(age, _)| age as f64 * (states[k] as f64).ln()))
            .sum();
        let filters = local_filters(&templates, &model.tables, &states, &canonical);
        let depth = templates.iter().map(|t| t.depth).max().unwrap_or(0);
        let mut column = Column {
            width,
            steps,
            relabel,
            depth,
            ln_free,
            free_states,
            units_per_column: model.formula_units / n as f64,
            keys: Vec::new(),
            rows: Vec::new(),
            sizes: Vec::new(),
            build_seconds: 0.0,
            charge,
            sector: None,
            charge_sign,
            flip: None,
            boundary_bits,
            reversible,
            filters,
            ln_boundary_space,
            weighting,
            factors: Vec::new(),
        };
        column.set_point(1.0, &[]);
        column.build_seconds = start.elapsed().as_secs_f64();
        Ok(column)
    }

    /// Build the transfer operator of a strip `width` cells wide, keeping the states that
    /// `config.sectors` asks for: every state ([`Sectors::Full`]), one charge
    /// ([`Sectors::Charge`]), or for [`Sectors::Largest`] the first guess of
    /// [`Column::guess`] — a guess only: [`super::strip`] and [`super::series`] find the
    /// sector that holds the largest eigenvalue and check it.
    pub fn new(crystal: &Crystal, width: usize, config: &StripConfig) -> Result<Column> {
        let layout = Column::layout(crystal, width, config)?;
        let kept = match config.sectors {
            Sectors::Full => Kept::Full,
            Sectors::Charge(q) => Kept::Charge(q),
            Sectors::Largest => layout.guess(),
        };
        layout.compiled(kept, config)
    }

    /// A copy of this layout (an uncompiled column) with the states `kept` compiled.
    pub(crate) fn compiled(&self, kept: Kept, config: &StripConfig) -> Result<Column> {
        let mut column = self.uncompiled(kept)?;
        column.compile(config)?;
        Ok(column)
    }

    /// Move the fields that survive a column to their places one column older.
    #[inline]
    pub(super) fn relabelled(&self, key: u64) -> u64 {
        self.relabel.iter().fold(0, |acc, &(from, mask, to)| {
            acc | (((key >> from) & mask) << to)
        })
    }

    /// [`Error::Budget`] when a step holds more states than allowed; see
    /// [`Column::should_stop`].
    pub(super) fn within_budget(&self, states: usize, config: &StripConfig) -> Result<()> {
        if states > config.max_states || states >= u32::MAX as usize {
            return Err(Error::Budget {
                cells: format!("a strip {} cells wide", self.width),
                detail: format!(
                    "a column step holds {states} states (budget {})",
                    config.max_states
                ),
            });
        }
        self.should_stop(config)
    }

    /// [`Error::Interrupted`] once the interrupt is raised, [`Error::Deadline`] after the
    /// deadline.
    pub(super) fn should_stop(&self, config: &StripConfig) -> Result<()> {
        if config.interrupt.raised() {
            return Err(Error::Interrupted {
                what: format!("computing a strip {} cells wide", self.width),
            });
        }
        if config.deadline.is_some_and(|d| Instant::now() > d) {
            return Err(Error::Deadline {
                cells: format!("a strip {} cells wide", self.width),
            });
        }
        Ok(())
    }

    /// Frontier states at a column boundary (the dimension of T).
    pub fn states(&self) -> usize {
        self.keys.len()
    }

    /// Largest number of states at any step of a column.
    pub fn peak_states(&self) -> usize {
        self.sizes
            .iter()
            .copied()
            .max()
            .unwrap_or(0)
            .max(self.keys.len())
    }

    /// Transitions (index-list entries) per application of T, summed over the steps.
    pub fn transitions(&self) -> usize {
        self.rows.iter().map(Rows::transitions).sum()
    }
}
