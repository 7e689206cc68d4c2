//! Depth and fanout repair and the refinement pass of the inclusion builder (see the
//! parent module's documentation, steps 4 and 5).

use super::Scorer;
use super::options::{OptList, Options};

/// A mutable tree on local indices, for repair and refinement.
#[derive(Clone)]
pub(super) struct Shape {
    pub(super) parent: Vec<Option<u32>>,
    pub(super) children: Vec<Vec<u32>>,
    pub(super) root: usize,
}

impl Shape {
    pub(super) fn new(parent: Vec<Option<u32>>, root: usize) -> Self {
        let mut children = vec![Vec::new(); parent.len()];
        for (v, p) in parent.iter().enumerate() {
            if let Some(p) = p {
                children[*p as usize].push(v as u32);
            }
        }
        Shape {
            parent,
            children,
            root,
        }
    }

    /// Depth of every node (root = 0), breadth-first.
    pub(super) fn depths(&self) -> Vec<usize> {
        let mut d = vec![0usize; self.parent.len()];
        for v in self.bfs() {
            for &c in &self.children[v] {
                d[c as usize] = d[v] + 1;
            }
        }
        d
    }

    pub(super) fn bfs(&self) -> Vec<usize> {
        let mut out = vec![self.root];
        let mut i = 0;
        while i < out.len() {
            let v = out[i];
            out.extend(self.children[v].iter().map(|&c| c as usize));
            i += 1;
        }
        out
    }

    pub(super) fn depth_of(&self, mut v: usize) -> usize {
        let mut k = 0;
        while let Some(p) = self.parent[v] {
            v = p as usize;
            k += 1;
        }
        k
    }

    /// Height of v's subtree (0 for a leaf).
    pub(super) fn height(&self, v: usize) -> usize {
        let mut h = 0;
        let mut stack = vec![(v, 0usize)];
        while let Some((x, k)) = stack.pop() {
            h = h.max(k);
            for &c in &self.children[x] {
                stack.push((c as usize, k + 1));
            }
        }
        h
    }

    /// Whether `q` lies in the subtree of `v` (v included).
    pub(super) fn in_subtree(&self, mut q: usize, v: usize) -> bool {
        loop {
            if q == v {
                return true;
            }
            match self.parent[q] {
                Some(p) => q = p as usize,
                None => return false,
            }
        }
    }

    pub(super) fn move_to(&mut self, v: usize, q: usize) {
        if let Some(p) = self.parent[v] {
            let ch = &mut self.children[p as usize];
            if let Some(pos) = ch.iter().position(|&x| x as usize == v) {
                ch.remove(pos);
            }
        }
        self.parent[v] = Some(q as u32);
        let ch = &mut self.children[q];
        let pos = ch.partition_point(|&x| (x as usize) < v);
        ch.insert(pos, v as u32);
    }

    /// The cheapest option of v that is not v's parent, has fanout room, keeps v's subtree
    /// within the depth limit and is not inside v's subtree.
    fn best_option(
        &self,
        v: usize,
        options: OptList,
        max_depth: Option<usize>,
        max_fanout: Option<usize>,
        below: f64,
    ) -> Option<(f64, usize)> {
        let h = if max_depth.is_some() {
            self.height(v)
        } else {
            0
        };
        for (w, q) in options.iter() {
            if w >= below {
                break;
            }
            let q = q as usize;
            if Some(q as u32) == self.parent[v] || self.in_subtree(q, v) {
                continue;
            }
            if max_fanout.is_some_and(|f| self.children[q].len() >= f) {
                continue;
            }
            if max_depth.is_some_and(|dm| self.depth_of(q) + 1 + h > dm) {
                continue;
            }
            return Some((w, q));
        }
        None
    }

    #[allow(clippy::too_many_arguments)]
    pub(super) fn repair_fanout(
        &mut self,
        f: usize,
        max_depth: Option<usize>,
        options: &Options,
        fixed: &[bool],
        members: &[u32],
        scorer: &Scorer,
        cost_of: &mut [f64],
    ) -> usize {
        let mut moves = 0;
        let mut i = 0;
        let mut queue = vec![self.root];
        while i < queue.len() {
            let p = queue[i];
            i += 1;
            if self.children[p].len() > f {
                // keep fixed children first, then the cheapest (ties: lower row)
                let mut ch = self.children[p].clone();
                ch.sort_by(|&a, &b| {
                    fixed[b as usize]
                        .cmp(&fixed[a as usize])
                        .then(
                            cost_of[a as usize]
                                .partial_cmp(&cost_of[b as usize])
                                .unwrap_or(std::cmp::Ordering::Equal),
                        )
                        .then(a.cmp(&b))
                });
                let kept: Vec<u32> = ch[..f.min(ch.len())].to_vec();
                for &c in &ch[f.min(ch.len())..] {
                    let c = c as usize;
                    if fixed[c] {
                        continue;
                    }
                    if let Some((w, q)) =
                        self.best_option(c, options.get(c), max_depth, Some(f), f64::INFINITY)
                    {
                        self.move_to(c, q);
                        cost_of[c] = w;
                    } else {
                        // under the cheapest kept sibling (its own fanout is handled when
                        // the walk reaches it)
                        let cm = members[c] as usize;
                        let best = kept
                            .iter()
                            .map(|&s| (scorer.cost(cm, members[s as usize] as usize), s))
                            .min_by(|a, b| {
                                a.0.partial_cmp(&b.0)
                                    .unwrap_or(std::cmp::Ordering::Equal)
                                    .then(a.1.cmp(&b.1))
                            });
                        let Some((w, s)) = best else { continue };
                        self.move_to(c, s as usize);
                        cost_of[c] = w;
                    }
                    moves += 1;
                }
            }
            queue.extend(self.children[p].iter().map(|&c| c as usize));
        }
        moves
    }

    pub(super) fn repair_depth(
        &mut self,
        dmax: usize,
        max_fanout: Option<usize>,
        options: &Options,
        fixed: &[bool],
        cost_of: &mut [f64],
    ) -> usize {
        let mut moves = 0;
        loop {
            let depth = self.depths();
            // the top-most movable nodes that are too deep
            let mut covered = vec![false; self.parent.len()];
            let mut violators = Vec::new();
            for v in self.bfs() {
                let up = self.parent[v].is_some_and(|p| covered[p as usize]);
                if up {
                    covered[v] = true;
                } else if depth[v] > dmax && !fixed[v] {
                    covered[v] = true;
                    violators.push(v);
                }
            }
            if violators.is_empty() {
                break;
            }
            for v in violators {
                let fits = options.get(v).iter().find(|&(_, q)| {
                    let q = q as usize;
                    depth[q] < dmax
                        && !self.in_subtree(q, v)
                        && max_fanout.is_none_or(|f| self.children[q].len() < f)
                });
                let (w, q) = match fits {
                    Some((w, q)) => (w, q as usize),
                    None => {
                        // the ancestor at depth dmax − 1
                        let mut a = v;
                        while depth[a] > dmax - 1 {
                            a = self.parent[a].expect("deeper than the root") as usize;
                        }
                        let w = options
                            .get(v)
                            .iter()
                            .find(|x| x.1 as usize == a)
                            .map_or(cost_of[v], |x| x.0);
                        (w, a)
                    }
                };
                self.move_to(v, q);
                cost_of[v] = w;
                moves += 1;
            }
        }
        moves
    }

    pub(super) fn refine(
        &mut self,
        rounds: usize,
        max_depth: Option<usize>,
        max_fanout: Option<usize>,
        options: &Options,
        fixed: &[bool],
        cost_of: &mut [f64],
    ) -> usize {
        let mut moves = 0;
        for _ in 0..rounds {
            let mut moved = 0;
            for v in 0..self.parent.len() {
                if v == self.root || fixed[v] {
                    continue;
                }
                let cur = cost_of[v];
                if let Some((w, q)) = self.best_option(
                    v,
                    options.get(v),
                    max_depth,
                    max_fanout,
                    cur - 1e-12 * cur.abs().max(1.0),
                ) {
                    self.move_to(v, q);
                    cost_of[v] = w;
                    moved += 1;
                }
            }
            moves += moved;
            if moved == 0 {
                break;
            }
        }
        moves
    }
}
