//! Every node's candidate parents in one compact table, and the arborescence over them when
//! the cheapest candidates already form a tree.
//!
//! Memory (issue 14, peak ≤ 3× the raw embedding bytes at 100 000 × 64): the candidate
//! lists were one `Vec` per node, grown by one push past their exact size (16 entries of
//! room for 9), and beside them the arborescence received every edge again (`Edge`, 16 bytes)
//! plus a heap node per edge (28 bytes). Here the lists are stored in blocks of consecutive
//! nodes (the blocks of the parallel candidate scan), each block one exact-size array with
//! offsets, and [`cheapest_if_acyclic`] returns the arborescence without building edges when
//! no cycle can arise.

/// A candidate parent: (edge cost, local index of the parent).
pub(super) type Opt = (f64, u32);

/// The candidates of a run of consecutive nodes: node `first + i` owns entries
/// `start[i]..start[i + 1]` of `cost` and `parent` (costs and parents in two arrays: 12
/// bytes a candidate instead of the 16 of an `(f64, u32)` pair with its padding).
#[derive(Default)]
pub(super) struct OptionBlock {
    start: Vec<u32>,
    cost: Vec<f64>,
    parent: Vec<u32>,
}

impl OptionBlock {
    /// An empty block with room for `nodes` nodes of about `per_node` candidates.
    pub(super) fn with_capacity(nodes: usize, per_node: usize) -> Self {
        let mut start = Vec::with_capacity(nodes + 1);
        start.push(0);
        OptionBlock {
            start,
            cost: Vec::with_capacity(nodes * per_node),
            parent: Vec::with_capacity(nodes * per_node),
        }
    }

    /// Append the next node's candidates.
    pub(super) fn push(&mut self, opts: &[Opt]) {
        self.cost.extend(opts.iter().map(|o| o.0));
        self.parent.extend(opts.iter().map(|o| o.1));
        // at most 256 phrases × (MAX_CANDIDATES_PER_NODE + 1) candidates, checked with the
        // parameters: well below 2³²
        let end = u32::try_from(self.cost.len()).expect("a block holds fewer than 2³² candidates");
        self.start.push(end);
    }

    /// Nodes in the block.
    fn len(&self) -> usize {
        self.start.len().saturating_sub(1)
    }

    /// Release unused room.
    pub(super) fn shrink(&mut self) {
        self.cost.shrink_to_fit();
        self.parent.shrink_to_fit();
        self.start.shrink_to_fit();
    }
}

/// One node's candidate list, in order: (cost, parent) pairs read from the two arrays of
/// its block.
#[derive(Clone, Copy)]
pub(super) struct OptList<'a> {
    cost: &'a [f64],
    parent: &'a [u32],
}

impl<'a> OptList<'a> {
    /// The candidates in order.
    pub(super) fn iter(self) -> impl Iterator<Item = Opt> + 'a {
        self.cost.iter().copied().zip(self.parent.iter().copied())
    }

    /// The first (cheapest) candidate.
    pub(super) fn first(self) -> Option<Opt> {
        Some((*self.cost.first()?, *self.parent.first()?))
    }

    /// The candidates as pairs.
    pub(super) fn to_vec(self) -> Vec<Opt> {
        self.iter().collect()
    }
}

/// The candidate parents of every node (local indices), each list sorted by (cost, row) —
/// the layout of `Vec<Vec<Opt>>` without a separate allocation per node. `options.get(v)`
/// is node v's list.
pub(super) struct Options {
    block: usize,
    blocks: Vec<OptionBlock>,
    len: usize,
}

impl Options {
    /// From blocks of `block` consecutive nodes each (the last may be shorter).
    pub(super) fn from_blocks(block: usize, blocks: Vec<OptionBlock>) -> Self {
        let len = blocks.iter().map(OptionBlock::len).sum();
        debug_assert!(blocks.iter().rev().skip(1).all(|b| b.len() == block.max(1)));
        Options {
            block: block.max(1),
            blocks,
            len,
        }
    }

    /// Number of nodes.
    pub(super) fn len(&self) -> usize {
        self.len
    }

    /// Node `v`'s candidates.
    pub(super) fn get(&self, v: usize) -> OptList<'_> {
        let b = &self.blocks[v / self.block];
        let i = v % self.block;
        let (lo, hi) = (b.start[i] as usize, b.start[i + 1] as usize);
        OptList {
            cost: &b.cost[lo..hi],
            parent: &b.parent[lo..hi],
        }
    }
}

/// The minimum-cost spanning arborescence when every node's cheapest candidate (the first
/// of its list: lowest cost, then lowest row) leads back to `root` without a cycle:
/// (parent of every node, cost of its edge, total cost summed in node order). A set of
/// cheapest incoming edges without a cycle is an optimal arborescence (Edmonds 1967: the
/// algorithm contracts only cycles of cheapest edges), and it is the one that
/// [`crate::model::arborescence::min_arborescence`] returns for edges listed by child, then
/// parent row: with no cycle it takes every node's first edge in (cost, position) order and
/// never contracts, so parents, edge costs and the total (the same sum in the same order)
/// are identical. None when the cheapest edges close a cycle, a node other than the root has
/// no candidate, or a cost is not finite: the caller then runs the general algorithm (which
/// also reports those errors).
pub(super) fn cheapest_if_acyclic(
    options: &Options,
    root: usize,
) -> Option<(Vec<Option<u32>>, Vec<f64>, f64)> {
    let m = options.len();
    let mut parent: Vec<Option<u32>> = vec![None; m];
    let mut cost_of = vec![0.0; m];
    for v in 0..m {
        if v == root {
            continue;
        }
        let opts = options.get(v);
        if opts.iter().any(|o| !o.0.is_finite()) {
            return None;
        }
        let (w, p) = opts.first()?;
        if p as usize == v || p as usize >= m {
            return None;
        }
        parent[v] = Some(p);
        cost_of[v] = w;
    }
    // every walk up the chosen parents must reach the root without meeting itself
    const NEW: u8 = 0;
    const ON_PATH: u8 = 1;
    const DONE: u8 = 2;
    let mut state = vec![NEW; m];
    state[root] = DONE;
    let mut path = Vec::new();
    for s in 0..m {
        let mut x = s;
        while state[x] == NEW {
            state[x] = ON_PATH;
            path.push(x);
            x = parent[x].expect("every node but the root has a parent here") as usize;
        }
        if state[x] == ON_PATH {
            return None;
        }
        for y in path.drain(..) {
            state[y] = DONE;
        }
    }
    let mut total = 0.0;
    for (v, w) in cost_of.iter().enumerate() {
        if v != root {
            total += w;
        }
    }
    Some((parent, cost_of, total))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::arborescence::{Edge, min_arborescence};
    use rand::{Rng, SeedableRng};
    use rand_xoshiro::Xoshiro256PlusPlus;

    fn table(lists: &[Vec<Opt>], block: usize) -> Options {
        let blocks = lists
            .chunks(block)
            .map(|ch| {
                let mut b = OptionBlock::with_capacity(ch.len(), 2);
                for l in ch {
                    b.push(l);
                }
                b
            })
            .collect();
        Options::from_blocks(block, blocks)
    }

    #[test]
    fn indexing_matches_the_lists() {
        let lists: Vec<Vec<Opt>> = (0..11)
            .map(|v| (0..v % 4).map(|j| (j as f64, j as u32)).collect())
            .collect();
        for block in [1, 3, 4, 11, 20] {
            let t = table(&lists, block);
            assert_eq!(t.len(), 11);
            for (v, l) in lists.iter().enumerate() {
                assert_eq!(t.get(v).to_vec(), l.to_vec(), "block {block}, node {v}");
            }
        }
    }

    /// The shortcut against the general algorithm (Tarjan's form of Chu–Liu/Edmonds in
    /// `model::arborescence`, itself checked against brute force there) on random graphs
    /// whose edges mostly point from lower to higher index (acyclic cheapest edges) with some
    /// backward edges (cycles, where the shortcut must step aside). Edges are listed by child,
    /// then parent, as the builder lists them.
    #[test]
    fn agrees_with_the_general_algorithm() {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(14);
        let (mut taken, mut declined) = (0, 0);
        for _ in 0..400 {
            let n = rng.gen_range(2..30usize);
            let mut lists: Vec<Vec<Opt>> = vec![Vec::new(); n];
            let mut edges = Vec::new();
            for (v, list) in lists.iter_mut().enumerate().skip(1) {
                let mut ps: Vec<u32> = vec![0];
                for _ in 0..rng.gen_range(0..5) {
                    let p = if rng.gen_bool(0.8) {
                        rng.gen_range(0..v)
                    } else {
                        rng.gen_range(0..n)
                    };
                    if p != v && !ps.contains(&(p as u32)) {
                        ps.push(p as u32);
                    }
                }
                ps.sort_unstable();
                for &p in &ps {
                    // few distinct costs, so ties are common
                    let w = rng.gen_range(0..6) as f64 * 0.5;
                    list.push((w, p));
                    edges.push(Edge {
                        from: p,
                        to: v as u32,
                        cost: w,
                    });
                }
                list.sort_by(|a, b| a.0.partial_cmp(&b.0).unwrap().then(a.1.cmp(&b.1)));
            }
            let full = min_arborescence(n, 0, &edges).unwrap();
            match cheapest_if_acyclic(&table(&lists, 4), 0) {
                Some((parent, cost_of, total)) => {
                    taken += 1;
                    assert_eq!(parent, full.parent);
                    assert_eq!(total.to_bits(), full.cost.to_bits());
                    for (v, w) in cost_of.iter().enumerate().skip(1) {
                        let e = full.edge[v].unwrap();
                        assert_eq!(w.to_bits(), edges[e].cost.to_bits());
                    }
                }
                None => {
                    declined += 1;
                    // declined only when the cheapest edges do close a cycle
                    let first: Vec<u32> = lists.iter().skip(1).map(|l| l[0].1).collect();
                    let mut cyclic = false;
                    for s in 1..n {
                        let (mut x, mut steps) = (s, 0);
                        while x != 0 && steps <= n {
                            x = first[x - 1] as usize;
                            steps += 1;
                        }
                        cyclic |= x != 0;
                    }
                    assert!(cyclic, "declined an acyclic choice");
                }
            }
        }
        assert!(
            taken > 100 && declined > 20,
            "taken {taken}, declined {declined}"
        );
    }

    #[test]
    fn declines_non_finite_costs_and_missing_candidates() {
        let t = table(&[vec![], vec![(f64::NAN, 0)]], 2);
        assert!(cheapest_if_acyclic(&t, 0).is_none());
        let t = table(&[vec![], vec![], vec![(1.0, 0)]], 2);
        assert!(cheapest_if_acyclic(&t, 0).is_none());
    }
}
