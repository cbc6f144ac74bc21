//! Variable orders for the frontier counter, and the plan that follows from one.
//!
//! A [`Plan`] fixes, for a variable order: the constraints that become complete (all
//! variables assigned) at each step, and the variables that leave the frontier after each step because no unfinished
//! constraint reads them. [`choose`] tries sweeps along every axis (ordered by the other axes
//! in turn) and a greedy order that always adds the variable completing the most, and keeps
//! the plan with the least predicted work.

use crate::model::Model;

pub use super::frontier::layout::width;

/// A variable order with everything the frontier counter needs to follow it.
#[derive(Clone, Debug)]
pub struct Plan {
    /// How the order was made ("sweep a,b,c", "greedy").
    pub name: String,
    /// Variables in the order they are added (only variables some constraint reads).
    pub order: Vec<usize>,
    /// Constraints that become complete at each step.
    pub completes: Vec<Vec<usize>>,
    /// Variables leaving the frontier after each step (no unfinished constraint reads them).
    pub leaving: Vec<Vec<usize>>,
    /// Number of variables no constraint reads (each multiplies the count by its states).
    pub free: Vec<usize>,
    /// Largest number of key bits in use (the fields of the frontier's variables, packed).
    pub max_bits: u32,
    /// Largest log2 of the frontier's state space (Σ log2 q over the frontier).
    pub max_log2_states: f64,
    /// Predicted work: Σ over steps of the state-space bound.
    pub cost: f64,
}

/// Build the plan for an order of the constrained variables.
pub fn plan(model: &Model, order: Vec<usize>, name: String) -> Option<Plan> {
    let nv = model.variables.len();
    let mut pos = vec![usize::MAX; nv];
    for (t, &v) in order.iter().enumerate() {
        pos[v] = t;
    }
    let mut completes = vec![Vec::new(); order.len()];
    let mut last_use = vec![0usize; nv];
    for (c, con) in model.constraints.iter().enumerate() {
        let last = con
            .scope
            .iter()
            .map(|&v| pos[v])
            .max()
            .expect("constraints have a scope");
        completes[last].push(c);
        for &v in &con.scope {
            last_use[v] = last_use[v].max(last);
        }
    }
    let mut leaving: Vec<Vec<usize>> = vec![Vec::new(); order.len()];
    for &v in &order {
        leaving[last_use[v]].push(v);
    }
    let (mut bits, mut max_bits, mut log2, mut max_log2, mut cost) =
        (0u32, 0u32, 0.0f64, 0.0f64, 0.0f64);
    for (t, &v) in order.iter().enumerate() {
        bits += width(model.variables[v].states);
        max_bits = max_bits.max(bits);
        log2 += (model.variables[v].states as f64).log2();
        max_log2 = max_log2.max(log2);
        cost += log2.min(60.0).exp2();
        for &u in &leaving[t] {
            bits -= width(model.variables[u].states);
            log2 -= (model.variables[u].states as f64).log2();
        }
    }
    // At most 63 bits: the counter uses u64::MAX as an end marker.
    if max_bits > 63 {
        return None;
    }
    let mut constrained = vec![false; nv];
    for &v in &order {
        constrained[v] = true;
    }
    let free = (0..nv).filter(|&v| !constrained[v]).collect();
    Some(Plan {
        name,
        order,
        completes,
        leaving,
        free,
        max_bits,
        max_log2_states: max_log2,
        cost,
    })
}

/// The constrained variables, in no particular order.
fn constrained(model: &Model) -> Vec<usize> {
    let mut seen = vec![false; model.variables.len()];
    for c in &model.constraints {
        for &v in &c.scope {
            seen[v] = true;
        }
    }
    (0..model.variables.len()).filter(|&v| seen[v]).collect()
}

/// Sweep along `axes[0]`, then `axes[1]`, then `axes[2]`.
fn sweep(model: &Model, vars: &[usize], axes: [usize; 3]) -> Vec<usize> {
    let mut order = vars.to_vec();
    let key = |v: usize| {
        let p = model.variables[v].position;
        [p[axes[0]], p[axes[1]], p[axes[2]]]
    };
    order.sort_by(|&a, &b| {
        key(a)
            .partial_cmp(&key(b))
            .unwrap_or(std::cmp::Ordering::Equal)
            .then(a.cmp(&b))
    });
    order
}

/// Greedy order: start from a sweep's first variable; always add the frontier-adjacent
/// variable that completes the most constraints (ties: the one the sweep puts first).
fn greedy(model: &Model, seed: &[usize]) -> Vec<usize> {
    let nv = model.variables.len();
    let mut of_var: Vec<Vec<usize>> = vec![Vec::new(); nv];
    for (c, con) in model.constraints.iter().enumerate() {
        for &v in &con.scope {
            of_var[v].push(c);
        }
    }
    let mut rank = vec![usize::MAX; nv];
    for (i, &v) in seed.iter().enumerate() {
        rank[v] = i;
    }
    let mut missing: Vec<usize> = model.constraints.iter().map(|c| c.scope.len()).collect();
    let mut placed = vec![false; nv];
    // score = constraints touched by placed variables that v would help finish (higher first)
    let mut score = vec![0i64; nv];
    let mut order = Vec::with_capacity(seed.len());
    let mut heap: std::collections::BinaryHeap<(i64, std::cmp::Reverse<usize>, usize)> =
        std::collections::BinaryHeap::new();
    let mut next_seed = 0;
    while order.len() < seed.len() {
        let v = loop {
            match heap.pop() {
                Some((s, std::cmp::Reverse(r), v))
                    if !placed[v] && s == score[v] && r == rank[v] =>
                {
                    break Some(v);
                }
                Some(_) => continue,
                None => break None,
            }
        };
        let v = match v {
            Some(v) => v,
            None => {
                while placed[seed[next_seed]] {
                    next_seed += 1;
                }
                seed[next_seed]
            }
        };
        placed[v] = true;
        order.push(v);
        for &c in &of_var[v] {
            missing[c] -= 1;
            for &u in &model.constraints[c].scope {
                if !placed[u] {
                    // weight finishing constraints strongly, touching weakly
                    score[u] += if missing[c] == 1 { 1 << 20 } else { 1 };
                    heap.push((score[u], std::cmp::Reverse(rank[u]), u));
                }
            }
        }
    }
    order
}

/// The cheapest of the candidate plans, or `None` if every order needs more than 64 bits.
pub fn choose(model: &Model) -> Option<Plan> {
    let vars = constrained(model);
    let axis_name = ['a', 'b', 'c'];
    let mut best: Option<Plan> = None;
    let perms = [
        [0, 1, 2],
        [0, 2, 1],
        [1, 0, 2],
        [1, 2, 0],
        [2, 0, 1],
        [2, 1, 0],
    ];
    let mut consider = |p: Option<Plan>| {
        if let Some(p) = p
            && best.as_ref().is_none_or(|b| p.cost < b.cost)
        {
            best = Some(p);
        }
    };
    for axes in perms {
        let order = sweep(model, &vars, axes);
        let name = format!(
            "sweep {},{},{}",
            axis_name[axes[0]], axis_name[axes[1]], axis_name[axes[2]]
        );
        let g = greedy(model, &order);
        consider(plan(model, order, name.clone()));
        consider(plan(model, g, format!("greedy from {name}")));
    }
    best
}

/// The largest frontier any candidate order would need, in log2 of states (for messages).
pub(crate) fn smallest_frontier_log2(model: &Model) -> f64 {
    let vars = constrained(model);
    let mut best = f64::INFINITY;
    for axes in [[0, 1, 2], [1, 0, 2], [2, 0, 1]] {
        let order = sweep(model, &vars, axes);
        // count without the 64-bit packing limit
        let nv = model.variables.len();
        let mut pos = vec![0usize; nv];
        for (t, &v) in order.iter().enumerate() {
            pos[v] = t;
        }
        let mut last_use = vec![0usize; nv];
        for con in &model.constraints {
            let last = con.scope.iter().map(|&v| pos[v]).max().unwrap_or(0);
            for &v in &con.scope {
                last_use[v] = last_use[v].max(last);
            }
        }
        let mut delta = vec![0.0f64; order.len() + 1];
        for &v in &order {
            let l = (model.variables[v].states as f64).log2();
            delta[pos[v]] += l;
            delta[last_use[v] + 1] -= l;
        }
        let (mut run, mut max) = (0.0f64, 0.0f64);
        for d in &delta {
            run += d;
            max = max.max(run);
        }
        best = best.min(max);
    }
    best
}
