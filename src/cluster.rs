//! A finite piece of the crystal: the unit cell repeated `A×B×C` times, periodic or open
//! along each axis.
//!
//! The cluster numbers its sites and bonds densely and keeps them in a `petgraph` multigraph
//! (self-loops and doubled edges are kept: on a 1×1 or 2×2 torus a bond may join a site to
//! itself or repeat another, and each such copy is an independent bond). Along an open axis,
//! bonds that leave the cell are dropped.

use std::fmt;

use petgraph::graph::UnGraph;

use crate::crystal::{Crystal, Entity, Shift};
use crate::error::{Error, Result};

/// How many cells along each axis, and which axes are periodic.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Cells {
    /// Repetitions along a, b, c (unused axes 1).
    pub counts: [usize; 3],
    /// Periodic (true) or open (false) along each axis.
    pub periodic: [bool; 3],
    /// Number of axes in use.
    pub dimensions: usize,
}

const AXES: [char; 3] = ['a', 'b', 'c'];

/// Most unit cells a cluster may hold.
pub const MAX_CELLS: usize = 1 << 22;

/// Most sites plus bonds a cluster may hold.
pub const MAX_ENTITIES: usize = 1 << 24;

/// Why a cell cannot be used. Each problem carries its data (the axis, the limit, the cell
/// as written); the binary words it with the flag it came from.
#[derive(Clone, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum CellsError {
    /// A size is missing in the notation (`4x`).
    MissingSize {
        /// The notation as written.
        text: String,
        /// Dimensions of the crystal.
        dimensions: usize,
    },
    /// A size is not a whole number.
    NotANumber {
        /// The notation as written.
        text: String,
        /// The part that is not a number.
        part: String,
    },
    /// As many sizes as neither 1 nor the crystal's dimensions.
    WrongCount {
        /// The notation as written, when the cell came from text.
        text: Option<String>,
        /// Sizes given.
        given: usize,
        /// Dimensions of the crystal.
        dimensions: usize,
    },
    /// A size of 0.
    ZeroSize {
        /// The notation as written, when the cell came from text.
        text: Option<String>,
        /// The axis (0 = a, 1 = b, 2 = c).
        axis: usize,
    },
    /// More unit cells than [`MAX_CELLS`].
    TooManyCells {
        /// The notation as written, when the cell came from text.
        text: Option<String>,
        /// The limit.
        max: usize,
    },
    /// An open axis that the crystal does not have (or that is not an axis name).
    NoSuchAxis {
        /// The axis as written or numbered.
        axis: String,
        /// Dimensions of the crystal.
        dimensions: usize,
    },
    /// A cell with a different number of axes than the crystal has dimensions.
    DimensionMismatch {
        /// The cell.
        cells: String,
        /// Its axes.
        axes: usize,
        /// The crystal's dimensions.
        dimensions: usize,
    },
    /// A cell with more sites and bonds than [`MAX_ENTITIES`].
    TooManyEntities {
        /// The cell.
        cells: String,
        /// Its unit cells.
        total: usize,
        /// Sites per unit cell.
        sites: usize,
        /// Bonds per unit cell.
        bonds: usize,
        /// The limit.
        max: usize,
    },
}

/// An example of the notation for a crystal of `dimensions` dimensions.
fn example(dimensions: usize) -> &'static str {
    ["4", "4x4", "4x4x2"][dimensions.clamp(1, 3) - 1]
}

impl CellsError {
    /// The notation as written, when the problem is in it (the binary names the flag).
    pub fn text(&self) -> Option<&str> {
        match self {
            CellsError::MissingSize { text, .. } | CellsError::NotANumber { text, .. } => {
                Some(text)
            }
            CellsError::WrongCount { text, .. }
            | CellsError::ZeroSize { text, .. }
            | CellsError::TooManyCells { text, .. } => text.as_deref(),
            _ => None,
        }
    }

    /// What is wrong, in words, without the notation it was found in.
    pub fn problem(&self) -> String {
        match self {
            CellsError::MissingSize { dimensions, .. } => format!(
                "a size is missing; expected whole numbers joined by x, e.g. {}",
                example(*dimensions)
            ),
            CellsError::NotANumber { part, .. } => {
                format!("'{part}' is not a whole number; expected e.g. 4x4x2")
            }
            CellsError::WrongCount {
                given, dimensions, ..
            } => format!(
                "{given} sizes given for a {dimensions}-dimensional crystal; expected {dimensions} (e.g. {})",
                example(*dimensions)
            ),
            CellsError::ZeroSize { axis, .. } => format!(
                "the size along {} is 0; every size must be at least 1",
                AXES.get(*axis).copied().unwrap_or('?')
            ),
            CellsError::TooManyCells { max, .. } => {
                format!("too large: at most {max} unit cells in all")
            }
            CellsError::NoSuchAxis { dimensions, .. } => format!(
                "expected a comma-separated list of axes among {}",
                AXES[..(*dimensions).clamp(1, 3)]
                    .iter()
                    .map(|c| c.to_string())
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
            CellsError::DimensionMismatch {
                cells,
                axes,
                dimensions,
            } => format!(
                "the cell {cells} has {axes} axes but the crystal has {dimensions} dimensions"
            ),
            CellsError::TooManyEntities {
                cells,
                total,
                sites,
                bonds,
                max,
            } => format!(
                "the cell {cells} is too large: {total} unit cells of {sites} sites and {bonds} bonds (at most {max} in all)"
            ),
        }
    }
}

impl fmt::Display for CellsError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match (self, self.text()) {
            (CellsError::NoSuchAxis { axis, .. }, _) => {
                write!(f, "open axis '{axis}': {}", self.problem())
            }
            (_, Some(text)) => write!(f, "cells '{text}': {}", self.problem()),
            (_, None) => f.write_str(&self.problem()),
        }
    }
}

impl std::error::Error for CellsError {}

impl Cells {
    /// `counts[k]` unit cells along axis k (one count per dimension of the crystal, 1 to
    /// 3), periodic along every axis.
    ///
    /// ```
    /// use groundcount::cluster::Cells;
    /// let c = Cells::periodic(&[4, 4, 2]).unwrap();
    /// assert_eq!(c.to_string(), "4x4x2 periodic");
    /// assert_eq!(c.with_open(2).unwrap().to_string(), "4x4x2 open along c");
    /// assert!(Cells::periodic(&[4, 0]).is_err());
    /// ```
    pub fn periodic(counts: &[usize]) -> Result<Cells> {
        let dimensions = counts.len();
        if !(1..=3).contains(&dimensions) {
            return Err(Error::CellSize(CellsError::WrongCount {
                text: None,
                given: dimensions,
                dimensions: dimensions.clamp(1, 3),
            }));
        }
        if let Some(axis) = counts.iter().position(|&c| c == 0) {
            return Err(Error::CellSize(CellsError::ZeroSize { text: None, axis }));
        }
        let total = counts.iter().try_fold(1usize, |a, &c| a.checked_mul(c));
        if total.is_none_or(|t| t > MAX_CELLS) {
            return Err(Error::CellSize(CellsError::TooManyCells {
                text: None,
                max: MAX_CELLS,
            }));
        }
        let mut all = [1usize; 3];
        all[..dimensions].copy_from_slice(counts);
        Ok(Cells {
            counts: all,
            periodic: [true; 3],
            dimensions,
        })
    }

    /// The same cell with open boundaries along `axis` (0 = a, 1 = b, 2 = c): bonds that
    /// leave the cell across those faces are dropped.
    pub fn with_open(mut self, axis: usize) -> Result<Cells> {
        if axis >= self.dimensions {
            return Err(Error::CellSize(CellsError::NoSuchAxis {
                axis: AXES.get(axis).map_or(axis.to_string(), |c| c.to_string()),
                dimensions: self.dimensions,
            }));
        }
        self.periodic[axis] = false;
        Ok(self)
    }

    /// Read the cell notation `4x4x2` (a single number `4` means 4 along every axis) and a
    /// comma-separated list of open axes `a,b` (none when `None`), as a user writes them,
    /// for a crystal of the given dimension. Errors carry the text that did not read
    /// ([`CellsError::text`]).
    pub fn parse(text: &str, open: Option<&str>, dimensions: usize) -> Result<Cells> {
        let bad = |e: CellsError| Error::CellSize(e);
        let parts: Vec<&str> = text.split(['x', 'X', '×']).map(str::trim).collect();
        let values: Vec<usize> = parts
            .iter()
            .map(|p| {
                if p.is_empty() {
                    return Err(bad(CellsError::MissingSize {
                        text: text.to_string(),
                        dimensions,
                    }));
                }
                p.parse::<usize>().map_err(|_| {
                    bad(CellsError::NotANumber {
                        text: text.to_string(),
                        part: p.to_string(),
                    })
                })
            })
            .collect::<Result<_>>()?;
        let counts: Vec<usize> = match values.len() {
            1 => vec![values[0]; dimensions],
            n if n == dimensions => values,
            n => {
                return Err(bad(CellsError::WrongCount {
                    text: Some(text.to_string()),
                    given: n,
                    dimensions,
                }));
            }
        };
        let with_text = |e: Error| match e {
            Error::CellSize(CellsError::ZeroSize { axis, .. }) => bad(CellsError::ZeroSize {
                text: Some(text.to_string()),
                axis,
            }),
            Error::CellSize(CellsError::TooManyCells { max, .. }) => {
                bad(CellsError::TooManyCells {
                    text: Some(text.to_string()),
                    max,
                })
            }
            other => other,
        };
        let mut cells = Cells::periodic(&counts).map_err(with_text)?;
        for axis in open
            .unwrap_or("")
            .split(',')
            .map(str::trim)
            .filter(|s| !s.is_empty())
        {
            match AXES[..dimensions]
                .iter()
                .position(|a| a.to_string() == axis)
            {
                Some(k) => cells = cells.with_open(k)?,
                None => {
                    return Err(bad(CellsError::NoSuchAxis {
                        axis: axis.to_string(),
                        dimensions,
                    }));
                }
            }
        }
        Ok(cells)
    }

    /// The same number of cells along every axis, all periodic.
    pub fn cube(n: usize, dimensions: usize) -> Cells {
        let mut counts = [1; 3];
        counts[..dimensions].fill(n);
        Cells {
            counts,
            periodic: [true; 3],
            dimensions,
        }
    }

    /// Number of unit cells.
    pub fn total(&self) -> usize {
        self.counts.iter().product()
    }
}

impl fmt::Display for Cells {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let sizes: Vec<String> = self.counts[..self.dimensions]
            .iter()
            .map(|c| c.to_string())
            .collect();
        write!(f, "{}", sizes.join("x"))?;
        let open: Vec<String> = (0..self.dimensions)
            .filter(|&k| !self.periodic[k])
            .map(|k| AXES[k].to_string())
            .collect();
        if open.is_empty() {
            write!(f, " periodic")
        } else if open.len() == self.dimensions {
            write!(f, " open")
        } else {
            write!(f, " open along {}", open.join(","))
        }
    }
}

/// A lower bound on the number of unit cells that any sweep of the frontier counter keeps on
/// its frontier at once, when it is clear without building the cell: the crystal's rules
/// tie each cell to its neighbours along every axis, so sweeping along any axis keeps a
/// whole cross-section open — at least the second-largest of the sizes (the smaller in
/// 2D, the middle one in 3D). `None` when some axis is not tied or the crystal is 1D.
///
/// Each cell on the frontier holds at least one variable of at least one bit, so a bound
/// above the counter's 63 bits means the count cannot run, whatever the order.
pub(crate) fn frontier_cells_lower_bound(crystal: &Crystal, cells: &Cells) -> Option<usize> {
    let dims = crystal.dimensions;
    if dims < 2 || cells.dimensions != dims {
        return None;
    }
    // Axes along which some rule instance reads variables in two cells one step apart.
    let mut tied = [false; 3];
    for rule in &crystal.rules {
        for inst in &rule.instances {
            let homes: Vec<Shift> = inst
                .slots
                .iter()
                .map(|s| match s.entity {
                    Entity::Site { shift, .. } | Entity::Bond { shift, .. } => shift,
                })
                .collect();
            for a in &homes {
                for b in &homes {
                    let d = [b[0] - a[0], b[1] - a[1], b[2] - a[2]];
                    for k in 0..dims {
                        if d[k].abs() == 1 && (0..dims).all(|j| j == k || d[j] == 0) {
                            tied[k] = true;
                        }
                    }
                }
            }
        }
    }
    if !tied[..dims].iter().all(|&t| t) {
        return None;
    }
    let mut sizes: Vec<usize> = cells.counts[..dims].to_vec();
    sizes.sort_unstable();
    Some(sizes[dims - 2])
}

/// A site of the cluster: which crystal site, in which cell.
#[derive(Clone, Copy, Debug)]
pub struct ClusterSite {
    /// Crystal site index.
    pub site: usize,
    /// Cell coordinates.
    pub cell: [usize; 3],
}

/// A bond of the cluster.
#[derive(Clone, Copy, Debug)]
pub struct ClusterBond {
    /// Crystal bond index.
    pub bond: usize,
    /// Cell of the `from` end.
    pub cell: [usize; 3],
    /// Cluster site at the `from` end.
    pub from: usize,
    /// Cluster site at the `to` end.
    pub to: usize,
}

/// The crystal tiled into a finite cell.
#[derive(Debug)]
pub struct Cluster<'c> {
    /// The crystal.
    pub crystal: &'c Crystal,
    /// Size and boundaries.
    pub cells: Cells,
    /// Sites, numbered cell by cell.
    pub sites: Vec<ClusterSite>,
    /// Bonds that exist in the cluster.
    pub bonds: Vec<ClusterBond>,
    /// For each (cell, crystal bond), its cluster bond index, if it exists.
    bond_index: Vec<Option<usize>>,
    /// Sites as nodes, bonds as edges (weights are cluster indices).
    pub graph: UnGraph<usize, usize>,
}

impl<'c> Cluster<'c> {
    /// Tile the crystal.
    pub fn new(crystal: &'c Crystal, cells: Cells) -> Result<Cluster<'c>> {
        if cells.dimensions != crystal.dimensions {
            return Err(Error::CellSize(CellsError::DimensionMismatch {
                cells: cells.to_string(),
                axes: cells.dimensions,
                dimensions: crystal.dimensions,
            }));
        }
        let ns = crystal.sites.len();
        let nb = crystal.bonds.len();
        let total = cells.total();
        if total.checked_mul(ns + nb).is_none_or(|n| n > MAX_ENTITIES) {
            return Err(Error::CellSize(CellsError::TooManyEntities {
                cells: cells.to_string(),
                total,
                sites: ns,
                bonds: nb,
                max: MAX_ENTITIES,
            }));
        }
        let mut sites = Vec::with_capacity(total * ns);
        let mut bonds = Vec::new();
        let mut bond_index = vec![None; total * nb];
        let mut cl = Cluster {
            crystal,
            cells,
            sites: Vec::new(),
            bonds: Vec::new(),
            bond_index: Vec::new(),
            graph: UnGraph::default(),
        };
        for c in 0..total {
            let cell = cl.cell_coords(c);
            for s in 0..ns {
                sites.push(ClusterSite { site: s, cell });
            }
        }
        for c in 0..total {
            let cell = cl.cell_coords(c);
            let base = [cell[0] as i64, cell[1] as i64, cell[2] as i64];
            for (b, bond) in crystal.bonds.iter().enumerate() {
                let from = c * ns + bond.from;
                if let Some(to) = cl.site_at(bond.to, base, bond.shift) {
                    bond_index[c * nb + b] = Some(bonds.len());
                    bonds.push(ClusterBond {
                        bond: b,
                        cell,
                        from,
                        to,
                    });
                }
            }
        }
        let mut graph = UnGraph::with_capacity(sites.len(), bonds.len());
        for i in 0..sites.len() {
            graph.add_node(i);
        }
        for (i, b) in bonds.iter().enumerate() {
            graph.add_edge(
                petgraph::graph::NodeIndex::new(b.from),
                petgraph::graph::NodeIndex::new(b.to),
                i,
            );
        }
        cl.sites = sites;
        cl.bonds = bonds;
        cl.bond_index = bond_index;
        cl.graph = graph;
        Ok(cl)
    }

    fn cell_coords(&self, c: usize) -> [usize; 3] {
        let n = self.cells.counts;
        [c % n[0], (c / n[0]) % n[1], c / (n[0] * n[1])]
    }

    fn cell_number(&self, u: [usize; 3]) -> usize {
        let n = self.cells.counts;
        u[0] + n[0] * (u[1] + n[1] * u[2])
    }

    /// Wrap (periodic) or reject (open) an unwrapped cell position.
    fn wrap(&self, base: [i64; 3], shift: Shift) -> Option<[usize; 3]> {
        let mut u = [0usize; 3];
        for k in 0..3 {
            let n = self.cells.counts[k] as i64;
            let x = base[k] + shift[k];
            if self.cells.periodic[k] {
                u[k] = x.rem_euclid(n) as usize;
            } else if (0..n).contains(&x) {
                u[k] = x as usize;
            } else {
                return None;
            }
        }
        Some(u)
    }

    fn site_at(&self, site: usize, base: [i64; 3], shift: Shift) -> Option<usize> {
        self.wrap(base, shift)
            .map(|u| self.cell_number(u) * self.crystal.sites.len() + site)
    }

    /// The cluster site or bond an entity anchored in cell `cell` refers to, if it lies inside.
    pub(crate) fn locate(&self, entity: Entity, cell: [usize; 3]) -> Option<ClusterEntity> {
        let base = [cell[0] as i64, cell[1] as i64, cell[2] as i64];
        match entity {
            Entity::Site { site, shift } => {
                self.site_at(site, base, shift).map(ClusterEntity::Site)
            }
            Entity::Bond { bond, shift } => {
                let u = self.wrap(base, shift)?;
                self.bond_index[self.cell_number(u) * self.crystal.bonds.len() + bond]
                    .map(ClusterEntity::Bond)
            }
        }
    }

    /// Cell coordinates of every cell.
    pub(crate) fn all_cells(&self) -> impl Iterator<Item = [usize; 3]> + '_ {
        (0..self.cells.total()).map(|c| self.cell_coords(c))
    }

    /// Formula units in the cluster.
    pub fn formula_units(&self) -> f64 {
        use crate::crystal::UnitBasis;
        match &self.crystal.formula_unit.basis {
            UnitBasis::Sites(None) => self.sites.len() as f64,
            UnitBasis::Sites(Some(sp)) => self
                .sites
                .iter()
                .filter(|s| self.crystal.sites[s.site].matches(sp))
                .count() as f64,
            UnitBasis::Bonds => self.bonds.len() as f64,
            UnitBasis::Cell(n) => n * self.cells.total() as f64,
        }
    }

    /// Position of a site in cell units (for ordering sweeps).
    pub(crate) fn site_position(&self, i: usize) -> [f64; 3] {
        let s = self.sites[i];
        let f = self.crystal.sites[s.site].frac;
        [0, 1, 2].map(|k| s.cell[k] as f64 + f[k])
    }

    /// Position of a bond's midpoint in cell units (unwrapped from its `from` end).
    pub(crate) fn bond_position(&self, i: usize) -> [f64; 3] {
        let b = self.bonds[i];
        let bond = &self.crystal.bonds[b.bond];
        let f = self.crystal.sites[bond.from].frac;
        let t = self.crystal.sites[bond.to].frac;
        [0, 1, 2].map(|k| b.cell[k] as f64 + 0.5 * (f[k] + t[k] + bond.shift[k] as f64))
    }

    /// Number of connected pieces of the bond graph.
    pub fn connected_components(&self) -> usize {
        petgraph::algo::connected_components(&self.graph)
    }
}

/// A site or bond of the cluster.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ClusterEntity {
    /// Cluster site index.
    Site(usize),
    /// Cluster bond index.
    Bond(usize),
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Issue 12: `Crystal::coordination` counts each bond's two ends; the second route is
    /// the graph of a periodic cluster large enough to show every bond whole (what
    /// `inspect` built before): the edges at each site of the central cell.
    #[test]
    fn issue12_coordination_matches_the_cluster_graph() {
        let dir = concat!(env!("CARGO_MANIFEST_DIR"), "/lattices");
        for entry in std::fs::read_dir(dir).unwrap() {
            let path = entry.unwrap().path();
            if path.extension().is_none_or(|e| e != "yaml") {
                continue;
            }
            let l = crate::Lattice::from_file(&path).unwrap();
            let c = &l.crystal;
            let n = (2 * c.reach() + 1).max(3) as usize;
            let cluster = Cluster::new(c, Cells::cube(n, c.dimensions)).unwrap();
            let mut centre = [0usize; 3];
            centre[..c.dimensions].fill(n / 2);
            let graph: Vec<usize> = (0..c.sites.len())
                .map(|s| {
                    let i = cluster
                        .sites
                        .iter()
                        .position(|x| x.site == s && x.cell == centre)
                        .unwrap();
                    cluster
                        .graph
                        .edges(petgraph::graph::NodeIndex::new(i))
                        .count()
                })
                .collect();
            assert_eq!(c.coordination(), graph, "{}", path.display());
        }
    }

    #[test]
    fn parses_sizes_and_open_axes() {
        let c = Cells::parse("4x3x2", Some("a, c"), 3).unwrap();
        assert_eq!(c.counts, [4, 3, 2]);
        assert_eq!(c.periodic, [false, true, false]);
        assert_eq!(c.total(), 24);
        assert_eq!(c.to_string(), "4x3x2 open along a,c");
        let one = Cells::parse("5", None, 2).unwrap();
        assert_eq!(one.counts, [5, 5, 1]);
        assert_eq!(one.to_string(), "5x5 periodic");
    }

    #[test]
    fn issue11_cross_section_bound_only_where_every_axis_is_tied() {
        let ice =
            crate::Lattice::from_yaml(include_str!("../lattices/square-ice.yaml"), "ice.yaml")
                .unwrap();
        let cells = Cells::parse("2000x70", None, 2).unwrap();
        assert_eq!(frontier_cells_lower_bound(&ice.crystal, &cells), Some(70));
        // Chains along a, not tied along b: the cross-section bound does not hold.
        let chains = crate::Lattice::from_yaml(
            "name: chains\ndimensions: 2\ncell: {vectors: [[1, 0], [0, 1]]}\n\
             sites: [{id: S, at: [0, 0]}]\nbonds: [{id: h, from: S, to: S, shift: [1, 0]}]\n\
             variables: [{on: bonds, kind: arrow}]\nrules: [{kind: inward, at: sites, allowed: [1]}]\n\
             formula_unit: {name: S, per: sites}\n",
            "chains.yaml",
        )
        .unwrap();
        assert_eq!(frontier_cells_lower_bound(&chains.crystal, &cells), None);
    }

    #[test]
    fn refuses_bad_sizes() {
        for bad in ["0x4", "4by4", "4x", "4x4x4", "-1x2", "99999999x99999999"] {
            assert!(Cells::parse(bad, None, 2).is_err(), "{bad}");
        }
        assert!(Cells::parse("4x4", Some("c"), 2).is_err());
    }
}
