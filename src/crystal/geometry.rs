//! The geometry of the cell: positions, distances, the bonds of a distance window, and the
//! largest cell shift in use.

use super::Crystal;
use super::types::*;
use super::validate::{MAX_WINDOW_CANDIDATES, MAX_WINDOW_COORDINATION};

pub(super) fn dot(a: [f64; 3], b: [f64; 3]) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

pub(super) fn norm(a: [f64; 3]) -> f64 {
    dot(a, a).sqrt()
}

pub(super) fn determinant(m: &[[f64; 3]; 3]) -> f64 {
    m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
        - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
        + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0])
}

/// The length of a vector without overflow or underflow in the squares.
pub(super) fn robust_norm(a: [f64; 3]) -> f64 {
    let m = a.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    if m == 0.0 || !m.is_finite() {
        return m;
    }
    m * norm(a.map(|x| x / m))
}

pub(super) fn add_shift(a: Shift, b: Shift) -> Shift {
    [a[0] + b[0], a[1] + b[1], a[2] + b[2]]
}

pub(super) fn sub_shift(a: Shift, b: Shift) -> Shift {
    [a[0] - b[0], a[1] - b[1], a[2] - b[2]]
}

impl Crystal {
    /// Cartesian position of a site in a displaced cell.
    pub fn cartesian(&self, site: usize, shift: Shift) -> [f64; 3] {
        let f = self.sites[site].frac;
        let mut r = [0.0; 3];
        for (k, fk) in f.iter().enumerate() {
            let u = fk + shift[k] as f64;
            for (c, rc) in r.iter_mut().enumerate() {
                *rc += u * self.vectors[k][c];
            }
        }
        r
    }

    /// Volume (area, length) of the unit cell.
    pub fn cell_measure(&self) -> f64 {
        determinant(&self.vectors).abs()
    }

    /// Cells to search along each axis for pairs up to distance `max` (cell heights bound
    /// the shifts worth trying).
    fn window_reaches(&self, max: f64) -> [i64; 3] {
        let vol = self.cell_measure();
        let mut reach = [0i64; 3];
        for (k, r) in reach.iter_mut().enumerate().take(self.dimensions) {
            let (a, b) = ((k + 1) % 3, (k + 2) % 3);
            let (u, v) = (self.vectors[a], self.vectors[b]);
            let cross = [
                u[1] * v[2] - u[2] * v[1],
                u[2] * v[0] - u[0] * v[2],
                u[0] * v[1] - u[1] * v[0],
            ];
            let height = vol / norm(cross);
            *r = ((max / height).ceil().min(1e6) as i64) + 1;
        }
        reach
    }

    /// The largest of [`Self::window_reaches`].
    pub(super) fn window_reach(&self, max: f64) -> i64 {
        self.window_reaches(max).into_iter().max().unwrap_or(0)
    }

    /// Every pair of sites of the two species whose distance lies in `[min, max]`; refused
    /// (with the reason, in the file's words) when the search or its result would be far
    /// larger than any physical window gives.
    pub(super) fn generate_bonds(
        &self,
        prefix: &str,
        between: &[String],
        min: f64,
        max: f64,
    ) -> std::result::Result<Vec<Bond>, String> {
        let reach = self.window_reaches(max);
        let pair_ok = |i: usize, j: usize| {
            let (a, b) = (&self.sites[i], &self.sites[j]);
            (a.matches(&between[0]) && b.matches(&between[1]))
                || (a.matches(&between[1]) && b.matches(&between[0]))
        };
        let first = self.sites.iter().filter(|s| s.matches(&between[0])).count() as u64;
        let second = self.sites.iter().filter(|s| s.matches(&between[1])).count() as u64;
        let shifts: u64 = reach.iter().map(|&r| 2 * r.max(0) as u64 + 1).product();
        let candidates = first.saturating_mul(second).saturating_mul(shifts);
        if candidates > MAX_WINDOW_CANDIDATES {
            return Err(format!(
                "the distance window up to {max} length units would test about {candidates} site pairs \
                 across {shifts} neighbouring cells (at most {MAX_WINDOW_CANDIDATES}); expected a window \
                 around the bond length"
            ));
        }
        let mut coordination = vec![0usize; self.sites.len()];
        let mut out = Vec::new();
        for i in 0..self.sites.len() {
            for j in i..self.sites.len() {
                if !pair_ok(i, j) {
                    continue;
                }
                for n0 in -reach[0]..=reach[0] {
                    for n1 in -reach[1]..=reach[1] {
                        for n2 in -reach[2]..=reach[2] {
                            let n = [n0, n1, n2];
                            if i == j && n <= [0; 3] {
                                continue; // each periodic image pair once
                            }
                            let a = self.cartesian(i, [0; 3]);
                            let c = self.cartesian(j, n);
                            let d = norm([c[0] - a[0], c[1] - a[1], c[2] - a[2]]);
                            if d >= min && d <= max {
                                coordination[i] += 1;
                                coordination[j] += 1;
                                if let Some(k) = [i, j]
                                    .into_iter()
                                    .find(|&k| coordination[k] > MAX_WINDOW_COORDINATION)
                                {
                                    return Err(format!(
                                        "the distance window [{min}, {max}] gives site '{}' more than \
                                         {MAX_WINDOW_COORDINATION} bonds; expected a window around the \
                                         bond length (run `inspect` with a narrower window to see the \
                                         bond lengths)",
                                        self.sites[k].id
                                    ));
                                }
                                out.push(Bond {
                                    id: format!("{prefix}{}", out.len() + 1),
                                    family: prefix.to_string(),
                                    from: i,
                                    to: j,
                                    shift: n,
                                    length: d,
                                });
                            }
                        }
                    }
                }
            }
        }
        Ok(out)
    }
    /// The coordination number of every site, in the order of [`Crystal::sites`]: the bonds
    /// that meet it in the infinite crystal. A bond from a site to itself in a shifted cell
    /// meets it twice (once at each end).
    ///
    /// ```
    /// let lattice = groundcount::Lattice::from_yaml(
    ///     groundcount::ICE_IH_YAML,
    ///     groundcount::spec::embedded_path("ice-ih.yaml"),
    /// )
    /// .unwrap();
    /// // Every oxygen of ice has four hydrogen bonds.
    /// assert!(lattice.crystal.coordination().iter().all(|&k| k == 4));
    /// ```
    pub fn coordination(&self) -> Vec<usize> {
        let mut k = vec![0; self.sites.len()];
        for b in &self.bonds {
            k[b.from] += 1;
            k[b.to] += 1;
        }
        k
    }
    /// The largest absolute cell shift used by any bond, group or rule instance.
    pub fn reach(&self) -> i64 {
        let mut r = 0;
        for b in &self.bonds {
            r = r.max(b.shift.iter().map(|x| x.abs()).max().unwrap_or(0));
        }
        for rule in &self.rules {
            for inst in &rule.instances {
                for s in &inst.slots {
                    let ends = match s.entity {
                        Entity::Site { shift, .. } => [shift, shift],
                        Entity::Bond { bond, shift } => {
                            [shift, add_shift(shift, self.bonds[bond].shift)]
                        }
                    };
                    for sh in ends {
                        r = r.max(sh.iter().map(|x| x.abs()).max().unwrap_or(0));
                    }
                }
            }
        }
        r
    }
}
