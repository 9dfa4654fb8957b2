//! Sharing one byte budget among the files of a folder: one candidate per file so that the summed score is
//! greatest within a total. Exact search over partial sums (pruned to those no other beats on both size and
//! score), falling back for large folders to a greedy on marginal gain per byte with a certified bound.

use crate::error::{Error, Result};
use serde::Serialize;

/// One file's options for [`allocate`]: (bytes, score) per candidate.
pub type Options = Vec<(u64, f64)>;

/// How [`allocate`] chose.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Method {
    /// Exact: the best summed score of all combinations (see [`allocate`]).
    Exact,
    /// Greedy on score gained per byte, within `upper_bound` of the best (see [`allocate_greedy`]).
    Greedy,
}

/// The outcome of [`allocate`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Allocation {
    /// How the choice was made.
    pub method: Method,
    /// The candidate chosen for each file (an index into its options).
    pub choice: Vec<usize>,
    /// Bytes of the chosen candidates, summed.
    pub total_bytes: u64,
    /// Scores of the chosen candidates, summed.
    pub total_score: f64,
    /// An upper bound on the best summed score any choice within the budget can reach: the optimum of the linear
    /// relaxation (each file's hull, with one fractional step). The exhaustive optimum lies in
    /// `total_score ..= upper_bound`.
    pub upper_bound: f64,
}

/// The points of `options` on the upper convex hull of score against bytes, cheapest first: the only candidates the
/// greedy walks through (their slopes, score gained per byte, decrease).
fn hull(options: &Options) -> Vec<usize> {
    let mut idx: Vec<usize> = (0..options.len()).filter(|&i| options[i].1.is_finite()).collect();
    idx.sort_by(|&a, &b| options[a].0.cmp(&options[b].0).then(options[b].1.total_cmp(&options[a].1)).then(a.cmp(&b)));
    let mut h: Vec<usize> = Vec::new();
    for i in idx {
        let (b, s) = (options[i].0 as f64, options[i].1);
        if let Some(&last) = h.last() {
            if s <= options[last].1 {
                continue; // not better than something no larger
            }
        }
        while h.len() >= 2 {
            let (b1, s1) = (options[h[h.len() - 2]].0 as f64, options[h[h.len() - 2]].1);
            let (b2, s2) = (options[h[h.len() - 1]].0 as f64, options[h[h.len() - 1]].1);
            // Drop the middle point when it lies on or below the line from the first to the new point.
            if (s2 - s1) * (b - b1) <= (s - s1) * (b2 - b1) {
                h.pop();
            } else {
                break;
            }
        }
        h.push(i);
    }
    h
}

/// Most partial sums [`allocate`] keeps per file before it falls back to the greedy.
pub const EXACT_MAX_STATES: usize = 50_000;

/// Shares `total` bytes among files, one candidate each, so that the summed score is greatest.
///
/// Exact when it can be: the files are combined one at a time, keeping only the (bytes, summed score) partial sums
/// that fit and that no other partial sum beats on both (a dominated partial sum can never lead to the best total), so
/// the best of the last set is the optimum of the exhaustive search. When a set would exceed [`EXACT_MAX_STATES`]
/// (large folders with many distinct sizes), it falls back to [`allocate_greedy`], whose `upper_bound` states how far
/// from the optimum it can be. Errors when even the cheapest candidates exceed `total`, or a file has no candidate.
pub fn allocate(files: &[Options], total: u64) -> Result<Allocation> {
    let greedy = allocate_greedy(files, total)?;
    // Partial sums: (bytes, score, index into the previous layer, candidate chosen for this file).
    let mut layers: Vec<Vec<(u64, f64, usize, usize)>> = Vec::with_capacity(files.len());
    let mut front: Vec<(u64, f64, usize, usize)> = vec![(0, 0.0, 0, 0)];
    for options in files {
        let mut next: Vec<(u64, f64, usize, usize)> = Vec::new();
        for (si, &(b0, s0, _, _)) in front.iter().enumerate() {
            for (j, &(b, s)) in options.iter().enumerate() {
                if s.is_finite() && b0 + b <= total {
                    next.push((b0 + b, s0 + s, si, j));
                }
            }
        }
        next.sort_by(|a, b| a.0.cmp(&b.0).then(b.1.total_cmp(&a.1)));
        let mut kept: Vec<(u64, f64, usize, usize)> = Vec::new();
        for p in next {
            if kept.last().is_none_or(|l| p.1 > l.1) {
                kept.push(p);
            }
        }
        if kept.len() > EXACT_MAX_STATES {
            return Ok(greedy);
        }
        layers.push(std::mem::replace(&mut front, kept));
    }
    let Some(best) = (0..front.len()).max_by(|&a, &b| front[a].1.total_cmp(&front[b].1)) else {
        return Ok(greedy);
    };
    // Walk back through the layers.
    let mut choice = vec![0; files.len()];
    let mut at = best;
    let mut layer = &front;
    for f in (0..files.len()).rev() {
        let (_, _, prev, j) = layer[at];
        choice[f] = j;
        at = prev;
        layer = &layers[f];
    }
    let total_bytes = choice.iter().zip(files).map(|(&j, o)| o[j].0).sum();
    let total_score: f64 = choice.iter().zip(files).map(|(&j, o)| o[j].1).sum();
    Ok(Allocation { method: Method::Exact, choice, total_bytes, total_score, upper_bound: total_score })
}

/// Shares `total` bytes among files by a greedy method (what [`allocate`] falls back to). Every file
/// starts at its cheapest candidate (best score among equally cheap ones); then, greedily, the upgrade with the most
/// score gained per extra byte is taken, walking each file's upper convex hull of score against bytes; an upgrade that
/// does not fit retires its file. Last, a pass moves any file to any of its candidates (hull or not) that raises its
/// score within the bytes left, until none does.
///
/// Bound: the greedy takes the hull steps in the order of the linear relaxation's optimum, so its summed score is at
/// least that optimum less the gain of the one step the relaxation takes fractionally; `upper_bound` reports the
/// relaxation's optimum, an upper bound on the exhaustive optimum. Errors when even the cheapest candidates exceed
/// `total`, or a file has no candidate.
pub fn allocate_greedy(files: &[Options], total: u64) -> Result<Allocation> {
    let hulls: Vec<Vec<usize>> = files.iter().map(hull).collect();
    if let Some(i) = hulls.iter().position(Vec::is_empty) {
        return Err(Error::param(format!("files[{i}]"), "no candidate", "at least one measured candidate"));
    }
    let floor: u64 = hulls.iter().zip(files).map(|(h, o)| o[h[0]].0).sum();
    if floor > total {
        return Err(Error::param(
            "total_bytes",
            total,
            format!("at least {floor} (the smallest candidate of every file, summed)"),
        ));
    }
    // Hull steps: (slope, file, step index); the relaxation and the greedy both take them by decreasing slope.
    let mut steps: Vec<(f64, usize, usize)> = Vec::new();
    for (f, h) in hulls.iter().enumerate() {
        for k in 1..h.len() {
            let (b0, s0) = files[f][h[k - 1]];
            let (b1, s1) = files[f][h[k]];
            steps.push(((s1 - s0) / (b1 - b0) as f64, f, k));
        }
    }
    // Slopes within a file decrease along its hull, so a stable sort keeps each file's steps in hull order.
    steps.sort_by(|a, b| b.0.total_cmp(&a.0));
    let base: f64 = hulls.iter().zip(files).map(|(h, o)| o[h[0]].1).sum();

    // The linear relaxation's optimum.
    let mut left = (total - floor) as f64;
    let mut upper_bound = base;
    for &(slope, f, k) in &steps {
        let cost = (files[f][hulls[f][k]].0 - files[f][hulls[f][k - 1]].0) as f64;
        if cost <= left {
            left -= cost;
            upper_bound += slope * cost;
        } else {
            upper_bound += slope * left;
            break;
        }
    }

    // The greedy.
    let mut at: Vec<usize> = vec![0; files.len()];
    let mut retired = vec![false; files.len()];
    let mut left = total - floor;
    for &(_, f, k) in &steps {
        if retired[f] || at[f] + 1 != k {
            continue;
        }
        let cost = files[f][hulls[f][k]].0 - files[f][hulls[f][k - 1]].0;
        if cost <= left {
            left -= cost;
            at[f] = k;
        } else {
            retired[f] = true;
        }
    }
    let mut choice: Vec<usize> = at.iter().zip(&hulls).map(|(&k, h)| h[k]).collect();
    // Fill what is left: any single move that raises the score within the bytes left, best gain first.
    loop {
        let mut best: Option<(f64, usize, usize)> = None;
        for (f, options) in files.iter().enumerate() {
            let (b0, s0) = options[choice[f]];
            for (j, &(b, s)) in options.iter().enumerate() {
                if s.is_finite() && s > s0 && b <= b0 + left && best.is_none_or(|(g, _, _)| s - s0 > g) {
                    best = Some((s - s0, f, j));
                }
            }
        }
        match best {
            Some((_, f, j)) => {
                left = left + files[f][choice[f]].0 - files[f][j].0;
                choice[f] = j;
            }
            None => break,
        }
    }
    let total_bytes = choice.iter().zip(files).map(|(&j, o)| o[j].0).sum();
    let total_score = choice.iter().zip(files).map(|(&j, o)| o[j].1).sum();
    Ok(Allocation {
        method: Method::Greedy,
        choice,
        total_bytes,
        total_score,
        upper_bound: upper_bound.max(total_score),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hull_keeps_the_concave_upper_points() {
        let o: Options = vec![(10, 1.0), (20, 5.0), (30, 6.0), (40, 10.0), (15, 0.5), (50, 10.0)];
        // (30, 6) lies below the line from (20, 5) to (40, 10); (15, 0.5) and (50, 10) are dominated.
        assert_eq!(hull(&o), vec![0, 1, 3]);
    }

    #[test]
    fn allocation_walks_the_best_slopes_and_refuses_too_small_a_total() {
        let a: Options = vec![(10, 0.0), (20, 10.0), (40, 12.0)];
        let b: Options = vec![(10, 0.0), (30, 5.0)];
        let r = allocate_greedy(&[a.clone(), b.clone()], 40).unwrap();
        assert_eq!(r.choice, vec![1, 0]);
        // 10 bytes left after the 10 → 20 upgrade: nothing else fits.
        assert_eq!((r.total_bytes, r.total_score), (30, 10.0));
        assert!(r.upper_bound >= r.total_score);
        assert!(allocate(&[a.clone(), b.clone()], 19).is_err());
        // The exact search finds a better use of the 40 bytes: (10, 0) + (30, 5) is worse, (20, 10) + (10, 0) = 10
        // is the best; with 50 bytes, (20, 10) + (30, 5) = 15.
        let r = allocate(&[a.clone(), b.clone()], 50).unwrap();
        assert_eq!((r.method, r.choice.clone(), r.total_score), (Method::Exact, vec![1, 1], 15.0));
    }
}
