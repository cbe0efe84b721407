//! Connected unit sets of bounded size, each visited once.

use std::collections::HashSet;

/// Visits every connected set of up to `max_size` units exactly once (as a
/// sorted slice), without hashing: Wernicke's ESU enumeration ("Efficient
/// detection of network motifs", IEEE/ACM Trans. Comput. Biol.
/// Bioinform. 3(4), 2006), which grows a set only by units above its root
/// that are exclusive neighbours of the unit just added.
pub(crate) fn each_connected_set(
    nbrs: &[Vec<u32>],
    max_size: usize,
    mut visit: impl FnMut(&[u32]),
) {
    walk_connected_sets(nbrs, max_size, |set, _| {
        visit(set);
        Some(false)
    });
}

/// [`each_connected_set`] with a flag carried down the walk: `visit` gets
/// the flag it returned for the set this one grew from (`false` for a
/// single unit) and returns this set's flag, or `None` to end the walk.
pub(crate) fn walk_connected_sets(
    nbrs: &[Vec<u32>],
    max_size: usize,
    mut visit: impl FnMut(&[u32], bool) -> Option<bool>,
) {
    struct Walk<'a, F> {
        nbrs: &'a [Vec<u32>],
        max_size: usize,
        /// Units in the set or adjacent to it (counted per set unit).
        near: Vec<u32>,
        set: Vec<u32>,
        sorted: Vec<u32>,
        visit: F,
        ended: bool,
    }
    impl<F: FnMut(&[u32], bool) -> Option<bool>> Walk<'_, F> {
        fn extend(&mut self, mut ext: Vec<u32>, root: u32, parent: bool) {
            self.sorted.clear();
            self.sorted.extend_from_slice(&self.set);
            self.sorted.sort_unstable();
            let Some(flag) = (self.visit)(&self.sorted, parent) else {
                self.ended = true;
                return;
            };
            if self.set.len() == self.max_size {
                return;
            }
            while let Some(w) = ext.pop() {
                // Exclusive neighbours of w: above the root, not in the set
                // and not adjacent to it.
                let mut next = ext.clone();
                for &u in &self.nbrs[w as usize] {
                    if u > root && self.near[u as usize] == 0 && !next.contains(&u) {
                        next.push(u);
                    }
                }
                self.enter(w);
                self.extend(next, root, flag);
                self.leave(w);
                if self.ended {
                    return;
                }
            }
        }
        fn enter(&mut self, w: u32) {
            self.set.push(w);
            self.near[w as usize] += 1;
            for &u in &self.nbrs[w as usize] {
                self.near[u as usize] += 1;
            }
        }
        fn leave(&mut self, w: u32) {
            self.set.pop();
            self.near[w as usize] -= 1;
            for &u in &self.nbrs[w as usize] {
                self.near[u as usize] -= 1;
            }
        }
    }
    let mut walk = Walk {
        nbrs,
        max_size,
        near: vec![0; nbrs.len()],
        set: Vec::with_capacity(max_size),
        sorted: Vec::with_capacity(max_size),
        visit: &mut visit,
        ended: false,
    };
    for v in 0..nbrs.len() as u32 {
        let ext: Vec<u32> = nbrs[v as usize]
            .iter()
            .copied()
            .filter(|&u| u > v)
            .collect();
        walk.enter(v);
        walk.extend(ext, v, false);
        walk.leave(v);
        if walk.ended {
            return;
        }
    }
}

/// Visits every connected set (sorted) of up to `max_size` units once, in
/// order of size; `visit` returns whether to grow the set further.
pub(crate) fn connected_sets(
    nbrs: &[Vec<u32>],
    max_size: usize,
    mut visit: impl FnMut(&[u32]) -> bool,
) {
    let mut seen: HashSet<Vec<u32>> = HashSet::new();
    let mut frontier: Vec<Vec<u32>> = (0..nbrs.len() as u32).map(|v| vec![v]).collect();
    for _size in 1..=max_size {
        let mut next = Vec::new();
        for s in frontier {
            if !seen.insert(s.clone()) || !visit(&s) {
                continue;
            }
            for &v in &s {
                for &u in &nbrs[v as usize] {
                    if !s.contains(&u) {
                        let mut t = s.clone();
                        t.push(u);
                        t.sort_unstable();
                        next.push(t);
                    }
                }
            }
        }
        next.sort();
        next.dedup();
        frontier = next;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::Rng;

    /// ESU enumeration against the breadth-first enumeration with a hash
    /// set (two independent ways to list connected sets).
    #[test]
    fn esu_lists_each_connected_set_once() {
        let mut rng = Rng(3);
        for _ in 0..20 {
            let n = 4 + rng.below(6);
            let mut nbrs: Vec<Vec<u32>> = vec![Vec::new(); n];
            for _ in 0..2 * n {
                let (a, b) = (rng.below(n) as u32, rng.below(n) as u32);
                if a != b && !nbrs[a as usize].contains(&b) {
                    nbrs[a as usize].push(b);
                    nbrs[b as usize].push(a);
                }
            }
            nbrs.iter_mut().for_each(|l| l.sort_unstable());
            let mut want: Vec<Vec<u32>> = Vec::new();
            connected_sets(&nbrs, 5, |s| {
                want.push(s.to_vec());
                true
            });
            let mut got: Vec<Vec<u32>> = Vec::new();
            each_connected_set(&nbrs, 5, |s| got.push(s.to_vec()));
            want.sort();
            got.sort();
            assert_eq!(got, want);
        }
    }
}
