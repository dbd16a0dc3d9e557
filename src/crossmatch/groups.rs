//! Connected groups of a candidate graph.
//!
//! Nodes are detections (numbered `0..n` across all catalogues); an edge joins
//! two detections that are candidate counterparts. Detections linked through
//! any chain of edges belong to one group, which is then resolved as a whole.
//!
//! - [`UnionFind`]: disjoint sets with path compression and union by size.
//! - [`connected_groups`]: the groups, in a fixed order that does not depend on
//!   the order of the edges.
//!
//! # Example
//!
//! ```
//! use fluxloom::crossmatch::groups::connected_groups;
//!
//! let groups = connected_groups(5, [(3, 1), (0, 4)]);
//! assert_eq!(groups, vec![vec![0, 4], vec![1, 3], vec![2]]);
//! ```

/// Disjoint-set forest over nodes `0..n`, with path compression and union by
/// size (standard; near-constant amortised cost per operation).
///
/// Stores two `u32` per node, so `n` is limited to `u32::MAX` nodes.
#[derive(Debug, Clone)]
pub struct UnionFind {
    /// Parent of each node; a root is its own parent.
    parent: Vec<u32>,
    /// Number of nodes in the set, meaningful for roots only.
    size: Vec<u32>,
}

impl UnionFind {
    /// `n` singleton sets `{0}, {1}, …, {n−1}`.
    ///
    /// # Panics
    ///
    /// Panics if `n > u32::MAX`.
    pub fn new(n: usize) -> Self {
        let n_u32 = u32::try_from(n).expect("UnionFind holds at most u32::MAX nodes");
        Self {
            parent: (0..n_u32).collect(),
            size: vec![1; n],
        }
    }

    /// Representative (root) of the set containing `x`; compresses the path
    /// so later calls are faster.
    ///
    /// # Panics
    ///
    /// Panics if `x` is not a node (`x >= n`).
    pub fn find(&mut self, x: usize) -> usize {
        let mut root = x;
        while self.parent[root] as usize != root {
            root = self.parent[root] as usize;
        }
        // Second pass: point every node on the path straight at the root.
        let mut node = x;
        while node != root {
            let next = self.parent[node] as usize;
            self.parent[node] = root as u32;
            node = next;
        }
        root
    }

    /// Merge the sets containing `a` and `b`; the smaller set joins the larger.
    /// Returns `true` if they were separate sets.
    ///
    /// # Panics
    ///
    /// Panics if `a` or `b` is not a node.
    pub fn union(&mut self, a: usize, b: usize) -> bool {
        let (mut ra, mut rb) = (self.find(a), self.find(b));
        if ra == rb {
            return false;
        }
        if self.size[ra] < self.size[rb] {
            std::mem::swap(&mut ra, &mut rb);
        }
        self.parent[rb] = ra as u32;
        self.size[ra] += self.size[rb];
        true
    }
}

/// Connected components of the graph with nodes `0..n` and the given edges.
///
/// Every node appears in exactly one group; a node without edges is a group
/// of its own. Each group is sorted ascending, and groups are sorted by their
/// smallest node, so the result is the same for any order or orientation of
/// the edges. Duplicate edges and self-loops are harmless.
///
/// Cost `O((n + e) α(n))` time and `O(n)` extra memory.
///
/// # Panics
///
/// Panics if an edge names a node `>= n`, or if `n > u32::MAX`.
pub fn connected_groups(n: usize, edges: impl IntoIterator<Item = (u32, u32)>) -> Groups {
    let mut sets = UnionFind::new(n);
    for (a, b) in edges {
        assert!(
            (a as usize) < n && (b as usize) < n,
            "edge ({a}, {b}) names a node outside 0..{n}"
        );
        sets.union(a as usize, b as usize);
    }
    // Visiting nodes in increasing order numbers the groups by their smallest
    // node and fills each group already sorted; two passes over the nodes lay
    // the groups out one after another in one array.
    let mut group_of_root = vec![u32::MAX; n];
    let mut group_of = vec![0u32; n];
    let mut sizes: Vec<u32> = Vec::new();
    for (node, group) in group_of.iter_mut().enumerate() {
        let root = sets.find(node);
        if group_of_root[root] == u32::MAX {
            group_of_root[root] = sizes.len() as u32;
            sizes.push(0);
        }
        *group = group_of_root[root];
        sizes[*group as usize] += 1;
    }
    let mut starts = Vec::with_capacity(sizes.len() + 1);
    starts.push(0u32);
    for size in &sizes {
        starts.push(starts[starts.len() - 1] + size);
    }
    let mut next = starts.clone();
    let mut members = vec![0u32; n];
    for (node, &g) in group_of.iter().enumerate() {
        members[next[g as usize] as usize] = node as u32;
        next[g as usize] += 1;
    }
    Groups { starts, members }
}

/// Connected groups, numbered by their smallest node, each sorted ascending,
/// laid out one after another in one array (no allocation per group).
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Groups {
    /// Where each group starts in `members`, plus the total at the end.
    starts: Vec<u32>,
    members: Vec<u32>,
}

impl Groups {
    /// Number of groups.
    pub fn len(&self) -> usize {
        self.starts.len().saturating_sub(1)
    }

    /// True when there are none.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The groups in order.
    pub fn iter(&self) -> impl ExactSizeIterator<Item = &[u32]> + '_ {
        (0..self.len()).map(|g| &self[g])
    }
}

impl std::ops::Index<usize> for Groups {
    type Output = [u32];

    fn index(&self, g: usize) -> &[u32] {
        &self.members[self.starts[g] as usize..self.starts[g + 1] as usize]
    }
}

impl PartialEq<Vec<Vec<u32>>> for Groups {
    fn eq(&self, other: &Vec<Vec<u32>>) -> bool {
        self.len() == other.len() && self.iter().zip(other).all(|(a, b)| a == &b[..])
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;
    use std::collections::VecDeque;

    /// Breadth-first search over an adjacency list: the textbook definition of
    /// connected components, written independently of [`UnionFind`].
    fn bfs_groups(n: usize, edges: &[(u32, u32)]) -> Vec<Vec<u32>> {
        let mut adjacent = vec![Vec::new(); n];
        for &(a, b) in edges {
            adjacent[a as usize].push(b as usize);
            adjacent[b as usize].push(a as usize);
        }
        let mut seen = vec![false; n];
        let mut groups = Vec::new();
        for start in 0..n {
            if seen[start] {
                continue;
            }
            seen[start] = true;
            let mut group = Vec::new();
            let mut queue = VecDeque::from([start]);
            while let Some(node) = queue.pop_front() {
                group.push(node as u32);
                for &next in &adjacent[node] {
                    if !seen[next] {
                        seen[next] = true;
                        queue.push_back(next);
                    }
                }
            }
            group.sort_unstable();
            groups.push(group);
        }
        groups
    }

    #[test]
    fn small_graph_by_hand() {
        // Edges 0–2, 2–5, 3–4, 6–6 over 8 nodes; by inspection the components
        // are {0,2,5}, {1}, {3,4}, {6}, {7}.
        let groups = connected_groups(8, [(5, 2), (0, 2), (4, 3), (6, 6)]);
        assert_eq!(
            groups,
            vec![vec![0, 2, 5], vec![1], vec![3, 4], vec![6], vec![7]]
        );
    }

    #[test]
    fn empty_and_edgeless() {
        // No nodes → no groups; no edges → n singletons (definition).
        assert!(connected_groups(0, []).is_empty());
        assert_eq!(connected_groups(3, []), vec![vec![0], vec![1], vec![2]]);
    }

    #[test]
    fn union_find_operations() {
        // Hand-worked: union(0,1), union(2,3) → {0,1}, {2,3}, {4}; then union(1,3) joins them.
        let mut sets = UnionFind::new(5);
        assert!(sets.union(0, 1));
        assert!(sets.union(2, 3));
        assert!(!sets.union(1, 0));
        assert_eq!(sets.find(0), sets.find(1));
        assert_ne!(sets.find(1), sets.find(2));
        assert!(sets.union(1, 3));
        assert_eq!(sets.find(0), sets.find(3));
        assert_ne!(sets.find(4), sets.find(0));
    }

    #[test]
    fn long_chain_is_one_group() {
        // A path 0–1–…–9999 (edges given in reverse) is one component (definition);
        // also exercises path compression on a deep tree without recursion.
        let n = 10_000u32;
        let groups = connected_groups(n as usize, (1..n).rev().map(|i| (i, i - 1)));
        assert_eq!(groups, vec![(0..n).collect::<Vec<_>>()]);
    }

    #[test]
    #[should_panic(expected = "outside")]
    fn edge_outside_range_panics() {
        // Documented panic: node 3 does not exist among 0..3.
        connected_groups(3, [(0, 3)]);
    }

    /// Edge list of a test graph.
    type Edges = Vec<(u32, u32)>;

    /// Random graph: node count, edges, and the same edges shuffled and some reversed.
    fn graph() -> impl Strategy<Value = (usize, Edges, Edges)> {
        (1usize..40)
            .prop_flat_map(|n| {
                let edge = (0..n as u32, 0..n as u32);
                (Just(n), proptest::collection::vec(edge, 0..60))
            })
            .prop_flat_map(|(n, edges)| {
                let flips = proptest::collection::vec(any::<bool>(), edges.len());
                (
                    Just(n),
                    Just(edges.clone()),
                    Just(edges).prop_shuffle(),
                    flips,
                )
            })
            .prop_map(|(n, edges, shuffled, flips)| {
                let permuted = shuffled
                    .into_iter()
                    .zip(flips)
                    .map(|((a, b), flip)| if flip { (b, a) } else { (a, b) })
                    .collect();
                (n, edges, permuted)
            })
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(128))]

        #[test]
        fn matches_bfs_and_ignores_edge_order((n, edges, permuted) in graph()) {
            // Reference: breadth-first search (textbook definition of components).
            let groups = connected_groups(n, edges.iter().copied());
            prop_assert_eq!(&groups, &bfs_groups(n, &edges));
            prop_assert_eq!(&groups, &connected_groups(n, permuted));
        }
    }
}
