//! Union–find (disjoint sets) over `0..n`, the one used by every stage: the design's DC-path
//! check groups nodes joined by conducting parts, the nodal analysis merges nodes joined by
//! ideal wires, and the low-frequency time constants merge capacitors in parallel.
//!
//! The representative of a group is always its smallest member, so node 0 (ground) stands
//! for every group that holds it, and results never depend on the order of the joins.
//! Path halving keeps the trees flat. No I/O.

/// Disjoint sets over `0..n`.
#[derive(Clone, Debug)]
pub struct UnionFind {
    parent: Vec<usize>,
}

impl UnionFind {
    /// Every element on its own.
    pub fn new(n: usize) -> UnionFind {
        UnionFind { parent: (0..n).collect() }
    }

    /// The representative of `x`'s group: its smallest member.
    pub fn find(&mut self, mut x: usize) -> usize {
        while self.parent[x] != x {
            self.parent[x] = self.parent[self.parent[x]];
            x = self.parent[x];
        }
        x
    }

    /// Joins the groups of `a` and `b`; false when they were one group already.
    pub fn join(&mut self, a: usize, b: usize) -> bool {
        let (ra, rb) = (self.find(a), self.find(b));
        if ra == rb {
            return false;
        }
        self.parent[ra.max(rb)] = ra.min(rb);
        true
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn groups_are_named_by_their_smallest_member_whatever_the_order_of_joins() {
        let mut u = UnionFind::new(6);
        assert!(u.join(5, 3));
        assert!(u.join(3, 4));
        assert!(!u.join(4, 5), "already one group");
        assert!(u.join(4, 1));
        assert_eq!([u.find(1), u.find(3), u.find(4), u.find(5)], [1, 1, 1, 1]);
        assert_eq!([u.find(0), u.find(2)], [0, 2]);
        u.join(2, 0);
        assert_eq!(u.find(2), 0);
    }

    #[test]
    fn a_long_chain_is_flattened_on_the_way() {
        let mut u = UnionFind::new(1000);
        for i in (1..1000).rev() {
            u.join(i, i - 1);
        }
        assert_eq!(u.find(999), 0);
        // After one find with path halving the path from 999 is at most half as long.
        let mut steps = 0;
        let mut x = 999;
        while u.parent[x] != x {
            x = u.parent[x];
            steps += 1;
        }
        assert!(steps <= 500, "{steps}");
    }
}
