//! Graph tools shared by the crates that reason about a circuit's
//! connectivity: validation here, the solver's topology of each mode.

/// Disjoint sets over the indices `0..n` (union-find), for the connected
/// parts of a circuit's graph.
///
/// The representative of every set is its **smallest member**: a union
/// always hangs the larger root under the smaller one. The answers therefore
/// depend only on which unions were made, never on their order, on hashing
/// or on how far paths have been shortened, so results built from them are
/// deterministic. [`UnionFind::find`] shortens paths as it goes (path
/// halving), which keeps the trees flat.
///
/// # Example
///
/// ```
/// use fluxstep_netlist::graph::UnionFind;
///
/// // Nodes 0..5; edges 3–1 and 1–4 join {1, 3, 4}.
/// let mut sets = UnionFind::new(5);
/// assert!(sets.union(3, 1));
/// assert!(sets.union(1, 4));
/// // 4–3 closes a loop: the two were already one set.
/// assert!(!sets.union(4, 3));
/// assert_eq!(sets.find(4), 1);
/// assert_eq!(sets.find(2), 2);
/// assert_eq!(sets.len(), 5);
/// ```
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct UnionFind {
    /// The parent of each index; a root is its own parent.
    parent: Vec<usize>,
}

impl UnionFind {
    /// `n` sets of one member each, `{0}`, `{1}`, …, `{n − 1}`.
    pub fn new(n: usize) -> Self {
        UnionFind {
            parent: (0..n).collect(),
        }
    }

    /// The number of indices (not of sets).
    pub fn len(&self) -> usize {
        self.parent.len()
    }

    /// True when there are no indices at all.
    pub fn is_empty(&self) -> bool {
        self.parent.is_empty()
    }

    /// The representative of the set holding `x`: its smallest member.
    ///
    /// # Panics
    ///
    /// If `x` is not below [`UnionFind::len`] (an index the caller made up,
    /// not user input).
    pub fn find(&mut self, mut x: usize) -> usize {
        while self.parent[x] != x {
            self.parent[x] = self.parent[self.parent[x]];
            x = self.parent[x];
        }
        x
    }

    /// Joins the sets of `a` and `b`. Returns false when they were already
    /// one set — for the edges of a graph added one by one, the edge that
    /// closes a loop.
    ///
    /// # Panics
    ///
    /// As [`UnionFind::find`].
    pub fn union(&mut self, a: usize, b: usize) -> bool {
        let (ra, rb) = (self.find(a), self.find(b));
        if ra == rb {
            return false;
        }
        let (lo, hi) = if ra < rb { (ra, rb) } else { (rb, ra) };
        self.parent[hi] = lo;
        true
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_representative_is_the_smallest_member_whatever_the_order() {
        // The same three edges in every order give the same roots.
        let edges = [(5, 2), (2, 7), (0, 6)];
        let orders = [[0, 1, 2], [2, 1, 0], [1, 0, 2], [1, 2, 0]];
        for order in orders {
            let mut s = UnionFind::new(8);
            for i in order {
                let (a, b) = edges[i];
                assert!(s.union(a, b));
            }
            let roots: Vec<usize> = (0..8).map(|x| s.find(x)).collect();
            assert_eq!(roots, [0, 1, 2, 3, 4, 2, 0, 2], "order {order:?}");
        }
    }

    #[test]
    fn union_reports_the_edge_that_closes_a_loop() {
        // A triangle 0–1–2 and a pendant edge 2–3: only 2–0 closes a loop.
        let mut s = UnionFind::new(4);
        let closed: Vec<bool> = [(0, 1), (1, 2), (2, 0), (2, 3)]
            .into_iter()
            .map(|(a, b)| !s.union(a, b))
            .collect();
        assert_eq!(closed, [false, false, true, false]);
        assert!(!s.union(3, 3), "an index is always in its own set");
    }

    #[test]
    fn a_long_chain_flattens_and_keeps_its_root() {
        // Joined from the far end, every find walks and halves the chain.
        let n = 1000;
        let mut s = UnionFind::new(n);
        for i in (1..n).rev() {
            s.union(i, i - 1);
        }
        for x in 0..n {
            assert_eq!(s.find(x), 0);
        }
        assert_eq!(s.len(), n);
        assert!(!s.is_empty() && UnionFind::new(0).is_empty());
    }
}
