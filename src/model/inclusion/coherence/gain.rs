//! The change of the summed disagreement for every candidate move of one phrase, without
//! building the per-node changes ([`Coherence::delta`] builds them for the move taken).
//!
//! Moving `v` from its parent `a` to `q` changes the sums of the nodes on the two paths
//! from `a` and from `q` up to their lowest common ancestor L. The nodes strictly between
//! `a` and L lose `v`'s subtree in the same way whatever `q` is, so their disagreements are
//! computed once per phrase and reused for all of its candidates ([`LeaveCache`]); only L
//! (children model) and `q`'s side are computed per candidate. Each value is computed with
//! exactly the operations of [`Coherence::delta`] and summed in its order, so the result is
//! bit for bit the same (test `the_fast_gain_equals_the_full_delta_bit_for_bit`).

use super::Coherence;
use crate::model::inclusion::repair::Shape;

/// Scratch of one phrase's candidate moves: the path from its parent to the root, and the
/// change of each node's disagreement when the phrase leaves (filled on first use).
pub(in crate::model::inclusion) struct LeaveCache {
    v: usize,
    pa: Vec<(usize, usize)>,
    leave: Vec<Option<f64>>,
    /// The change of a node's disagreement when v's subtree enters it through the given
    /// child (children model): candidates under one branch share the nodes above it.
    enter: Vec<((usize, usize), f64)>,
    pb: Vec<(usize, usize)>,
    t: Vec<f64>,
    tb: Vec<f64>,
    b1: Vec<f64>,
    b2: Vec<f64>,
    m1: Vec<f64>,
    m2: Vec<f64>,
}

impl LeaveCache {
    /// A cache for moves of nothing yet (call [`LeaveCache::reset`] per phrase).
    pub(in crate::model::inclusion) fn new(d: usize) -> Self {
        let z = || vec![0.0; d];
        LeaveCache {
            v: usize::MAX,
            pa: Vec::new(),
            leave: Vec::new(),
            enter: Vec::new(),
            pb: Vec::new(),
            t: z(),
            tb: z(),
            b1: z(),
            b2: z(),
            m1: z(),
            m2: z(),
        }
    }

    /// Prepare for the moves of `v` in the current `shape`.
    pub(in crate::model::inclusion) fn reset(&mut self, coh: &Coherence, shape: &Shape, v: usize) {
        self.v = v;
        let a = shape.parent[v].expect("not the root") as usize;
        fill_path(shape, a, v, &mut self.pa);
        self.leave.clear();
        self.leave.resize(self.pa.len(), None);
        self.enter.clear();
        if coh.points {
            // the subtree's first and second sums plus v's own mean, as `delta` makes them
            let gv = coh.members[v] as usize;
            let mv = coh.g.mean(gv);
            self.m1.copy_from_slice(coh.s1.get(v));
            self.m2.copy_from_slice(coh.s2.get(v));
            for ((a, b), &x) in self.m1.iter_mut().zip(self.m2.iter_mut()).zip(mv) {
                let x = x as f64;
                *a += x;
                *b += x * x;
            }
        }
    }
}

/// The (node, child on the path) pairs from `from` up to the root into `out`.
fn fill_path(shape: &Shape, from: usize, first: usize, out: &mut Vec<(usize, usize)>) {
    out.clear();
    out.push((from, first));
    let mut y = from;
    while let Some(p) = shape.parent[y] {
        out.push((p as usize, y));
        y = p as usize;
    }
}

// The index loops below mirror `Coherence::delta` operation for operation, so that every sum
// is the same to the bit.
#[allow(clippy::needless_range_loop)]
impl Coherence<'_> {
    /// The first value of [`Coherence::delta`] for moving `c.v` (see [`LeaveCache::reset`])
    /// to `q`, bit for bit, or None where `delta` prunes the move, or where the change
    /// cannot fall below `-bar`: every disagreement is ≥ 0, so the summed change is at
    /// least minus the current disagreements of the nodes it touches (`room`), and the move
    /// is skipped when `room` is not above `bar` by more than rounding. `bar` = −∞ skips
    /// nothing beyond `delta`.
    pub(in crate::model::inclusion) fn gain(
        &self,
        shape: &Shape,
        q: usize,
        rise: f64,
        bar: f64,
        c: &mut LeaveCache,
    ) -> Option<f64> {
        let v = c.v;
        fill_path(shape, q, v, &mut c.pb);
        let mut na = c.pa.len();
        // common tail (same node, same child on the path) cancels
        while na > 0 && c.pb.last() == Some(&c.pa[na - 1]) {
            na -= 1;
            c.pb.pop();
        }
        let s = self.size[v];
        if rise > 0.0 || bar > f64::NEG_INFINITY {
            let mut room: f64 = c.pa[..na].iter().map(|x| self.dis[x.0]).sum();
            room += c.pb.iter().map(|x| self.dis[x.0]).sum::<f64>();
            if (rise > 0.0 && room <= rise) || room + 1e-9 * room.max(1.0) <= bar {
                return None;
            }
        }
        // the lowest common ancestor ends both paths (the same node, different children)
        let mut total = 0.0;
        if self.points {
            // the common ancestor keeps v's subtree: only the nodes below it change
            let (na, nb) = (na - 1, c.pb.len() - 1);
            for i in 0..na {
                total += self.leave_value(c, i);
            }
            for i in 0..nb {
                let x = c.pb[i].0;
                let (o1, o2) = (self.s1.get(x), self.s2_of(x));
                for j in 0..self.d {
                    c.b1[j] = o1[j] + c.m1[j];
                    c.b2[j] = o2[j] + c.m2[j];
                }
                total += self.disagreement(x, self.s0[x] + s, &c.b1, &c.b2) - self.dis[x];
            }
        } else {
            for i in 0..na - 1 {
                total += self.leave_value(c, i);
            }
            // the common ancestor: v's branch leaves through one child, enters through another
            let (l, ya) = c.pa[na - 1];
            let yb = c.pb[c.pb.len() - 1].1;
            self.term(ya, l, &mut c.t);
            self.term(yb, l, &mut c.tb);
            let mut ds0 = 0.0;
            ds0 += -s;
            ds0 += s;
            let (o1, o2) = (self.s1.get(l), self.s2_of(l));
            for j in 0..self.d {
                let mut e = 0.0;
                e += -s * c.t[j];
                e += s * c.tb[j];
                c.b1[j] = o1[j] + e;
            }
            if self.own {
                let (ma, mb) = (
                    self.g.mean(self.members[ya] as usize),
                    self.g.mean(self.members[yb] as usize),
                );
                for j in 0..self.d {
                    let mut e = 0.0;
                    e += -s * ma[j] as f64;
                    e += s * mb[j] as f64;
                    c.b2[j] = o2[j] + e;
                }
            }
            total += self.disagreement(l, self.s0[l] + ds0, &c.b1, &c.b2) - self.dis[l];
            for i in 0..c.pb.len() - 1 {
                let key = c.pb[i];
                let val = match c.enter.iter().find(|e| e.0 == key) {
                    Some(e) => e.1,
                    None => {
                        let val = self.side_value(key.0, key.1, 1.0, s, c);
                        c.enter.push((key, val));
                        val
                    }
                };
                total += val;
            }
        }
        Some(total)
    }

    /// The change of the disagreement of the `i`-th node on the path from v's parent when v
    /// leaves it (not the common ancestor), cached per phrase.
    fn leave_value(&self, c: &mut LeaveCache, i: usize) -> f64 {
        if let Some(x) = c.leave[i] {
            return x;
        }
        let (x, y) = c.pa[i];
        let s = self.size[c.v];
        let val = if self.points {
            let (o1, o2) = (self.s1.get(x), self.s2_of(x));
            for j in 0..self.d {
                c.b1[j] = o1[j] - c.m1[j];
                c.b2[j] = o2[j] - c.m2[j];
            }
            self.disagreement(x, self.s0[x] - s, &c.b1, &c.b2) - self.dis[x]
        } else {
            self.side_value(x, y, -1.0, s, c)
        };
        c.leave[i] = Some(val);
        val
    }

    /// Children model: the change of x's disagreement when a subtree of `s` phrases leaves
    /// (sign −1) or enters (sign 1) it through its child `y`.
    fn side_value(&self, x: usize, y: usize, sign: f64, s: f64, c: &mut LeaveCache) -> f64 {
        self.term(y, x, &mut c.t);
        let mut ds0 = 0.0;
        ds0 += sign * s;
        let (o1, o2) = (self.s1.get(x), self.s2_of(x));
        for j in 0..self.d {
            let mut e = 0.0;
            e += sign * s * c.t[j];
            c.b1[j] = o1[j] + e;
        }
        if self.own {
            let my = self.g.mean(self.members[y] as usize);
            for j in 0..self.d {
                let mut e = 0.0;
                e += sign * s * my[j] as f64;
                c.b2[j] = o2[j] + e;
            }
        }
        self.disagreement(x, self.s0[x] + ds0, &c.b1, &c.b2) - self.dis[x]
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::gaussian::Gaussians;

    /// A random tree of `n` nodes (root 0) and random diagonal Gaussians of dimension `d`
    /// (xorshift, fixed seed; common practice, no source).
    fn random_case(n: usize, d: usize, seed: u64) -> (Gaussians, Vec<Option<u32>>) {
        let mut x = seed | 1;
        let mut next = || {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            (x >> 11) as f64 / (1u64 << 53) as f64
        };
        let means: Vec<f64> = (0..n * d).map(|_| 4.0 * next() - 2.0).collect();
        let vars: Vec<f64> = (0..n * d).map(|_| 0.05 + 2.0 * next()).collect();
        let parent = (0..n)
            .map(|v| (v > 0).then(|| (next() * v as f64) as u32))
            .collect();
        let g = Gaussians::from_diagonal(n, d, means, vars, 1e-6).expect("valid");
        (g, parent)
    }

    /// The fast per-candidate gain is the first value of the full `delta`, to the bit, for
    /// every phrase and every target outside its subtree, in all three readings, before and
    /// after some moves; and it prunes exactly where `delta` does. Broken twin: summing the
    /// cached values in another order (or caching the common ancestor) changes the last
    /// bits, which `to_bits` equality catches.
    #[test]
    fn the_fast_gain_equals_the_full_delta_bit_for_bit() {
        for (points, own, seed) in [(false, false, 7), (false, true, 11), (true, false, 13)] {
            let (g, parent) = random_case(40, 5, seed);
            let members: Vec<u32> = (0..40).collect();
            let mut shape = Shape::new(parent, 0);
            let mut coh = Coherence::with_model(&g, &members, &shape, 1.0, points, own);
            let mut cache = LeaveCache::new(5);
            let mut compared = 0;
            for round in 0..3 {
                for v in 1..40 {
                    cache.reset(&coh, &shape, v);
                    let mut first_move = None;
                    for q in 0..40 {
                        if Some(q as u32) == shape.parent[v] || shape.in_subtree(q, v) {
                            continue;
                        }
                        for rise in [0.0, 0.5, 3.0] {
                            let full = coh.delta(&shape, v, q, rise).map(|x| x.0);
                            let fast = coh.gain(&shape, q, rise, f64::NEG_INFINITY, &mut cache);
                            assert_eq!(
                                full.map(f64::to_bits),
                                fast.map(f64::to_bits),
                                "points {points} own {own} v {v} q {q} rise {rise}"
                            );
                            compared += 1;
                        }
                        first_move.get_or_insert(q);
                    }
                    // move some phrases so the sums are not those of the start
                    if let Some(q) = first_move.filter(|_| (v + round) % 3 == 0) {
                        let (_, ch) = coh.delta(&shape, v, q, 0.0).expect("no pruning");
                        coh.apply(v, ch);
                        shape.move_to(v, q);
                    }
                }
            }
            assert!(compared > 1000, "{compared}");
        }
    }
}
