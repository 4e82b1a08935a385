//! Dependency order of formula columns: which formula must be computed
//! before which, which formulas a change reaches, and the names in a cycle.
//! Sheets have tens of columns, not thousands, so the simple quadratic
//! scans here cost nothing next to evaluating a single row.

use super::Column;

/// Formula columns in an order where every formula comes after the formula
/// columns it depends on; among ready columns the leftmost goes first, so
/// the order is deterministic. On a cycle, returns its column indices in
/// data-flow order (each is computed from the previous), first one repeated
/// at the end.
pub(crate) fn dependency_order(cols: &[Column]) -> Result<Vec<usize>, Vec<usize>> {
    let is_formula = |c: usize| cols[c].formula.is_some();
    let mut done = vec![false; cols.len()];
    let mut order = Vec::new();
    let pending: Vec<usize> = (0..cols.len()).filter(|&c| is_formula(c)).collect();
    while order.len() < pending.len() {
        let ready = pending.iter().copied().find(|&c| {
            !done[c]
                && cols[c]
                    .formula
                    .as_ref()
                    .is_some_and(|f| f.deps.iter().all(|&d| !is_formula(d) || done[d]))
        });
        match ready {
            Some(c) => {
                done[c] = true;
                order.push(c);
            }
            None => return Err(find_cycle(cols, &done, &pending)),
        }
    }
    Ok(order)
}

/// Walks from an unfinished formula along unfinished dependencies until a
/// column repeats. Every unfinished formula has an unfinished formula
/// dependency (otherwise it would have been ready), so the walk never stops
/// before it repeats.
fn find_cycle(cols: &[Column], done: &[bool], pending: &[usize]) -> Vec<usize> {
    let unfinished = |c: usize| cols[c].formula.is_some() && !done[c];
    let Some(mut at) = pending.iter().copied().find(|&c| unfinished(c)) else {
        return Vec::new();
    };
    let mut path: Vec<usize> = Vec::new();
    loop {
        if let Some(pos) = path.iter().position(|&c| c == at) {
            // The path follows "depends on"; reverse it into data-flow order.
            let mut cycle: Vec<usize> = path[pos..].to_vec();
            cycle.reverse();
            // Start at the leftmost column, so the message is stable.
            if let Some(first) = (0..cycle.len()).min_by_key(|&i| cycle[i]) {
                cycle.rotate_left(first);
            }
            cycle.push(cycle[0]);
            return cycle;
        }
        path.push(at);
        let next = cols[at]
            .formula
            .as_ref()
            .and_then(|f| f.deps.iter().copied().find(|&d| unfinished(d)));
        match next {
            Some(n) => at = n,
            None => return path,
        }
    }
}

/// The formula columns reached by a change to the `seeds` columns, in
/// dependency order. A seed that is itself a formula column is included
/// (its definition changed); a data seed is not.
pub(crate) fn affected(cols: &[Column], order: &[usize], seeds: &[usize]) -> Vec<usize> {
    let mut hit = vec![false; cols.len()];
    for &s in seeds {
        hit[s] = true;
    }
    let mut out = Vec::new();
    for &c in order {
        let reached = hit[c]
            || cols[c]
                .formula
                .as_ref()
                .is_some_and(|f| f.deps.iter().any(|&d| hit[d]));
        if reached {
            hit[c] = true;
            out.push(c);
        }
    }
    out
}
