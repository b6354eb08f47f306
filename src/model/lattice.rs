//! Lattices: sites, bonds in a documented order, neighbours and graph distances.
//!
//! Sites of the regular geometries are numbered row-major: on an `[Lx, Ly, Lz]` cubic lattice the
//! site at `(x, y, z)` is `x·Ly·Lz + y·Lz + z` (the last coordinate runs fastest); a square
//! lattice is the same with `Lz = 1`, a chain with `Ly = Lz = 1`.
//!
//! Bond order (the order of `/lattice/bonds`, of `/hamiltonian/bond_norms` and of `each_bond`
//! noise instances): for every site `s` in increasing order, for every axis in order (x, then y,
//! then z), the bond from `s` to its neighbour one step forward along that axis, if it exists
//! (open boundary) or wrapped around (periodic). A bond is stored as `[s, neighbour]`. Periodic
//! boundaries need at least 3 sites along every axis, so that no bond is doubled.
//!
//! Neighbours are kept in compressed (CSR) form, and distances come from a multi-source
//! breadth-first search, `O(sites + bonds)`: both fine for 10^6 sites.

use std::collections::VecDeque;

/// The geometry of a lattice.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Geometry {
    Chain,
    Square,
    Cubic,
    Graph,
}

/// Open or periodic boundary.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Boundary {
    Open,
    Periodic,
}

impl Geometry {
    /// The spelling used in files.
    pub fn as_str(self) -> &'static str {
        match self {
            Geometry::Chain => "chain",
            Geometry::Square => "square",
            Geometry::Cubic => "cubic",
            Geometry::Graph => "graph",
        }
    }

    /// Parses the spelling used in files.
    pub fn parse(text: &str) -> Option<Geometry> {
        [
            Geometry::Chain,
            Geometry::Square,
            Geometry::Cubic,
            Geometry::Graph,
        ]
        .into_iter()
        .find(|g| g.as_str() == text)
    }

    /// Number of entries of `shape` (0 for a graph).
    pub fn dimension(self) -> usize {
        match self {
            Geometry::Chain => 1,
            Geometry::Square => 2,
            Geometry::Cubic => 3,
            Geometry::Graph => 0,
        }
    }
}

impl Boundary {
    /// The spelling used in files.
    pub fn as_str(self) -> &'static str {
        match self {
            Boundary::Open => "open",
            Boundary::Periodic => "periodic",
        }
    }

    /// Parses the spelling used in files.
    pub fn parse(text: &str) -> Option<Boundary> {
        match text {
            "open" => Some(Boundary::Open),
            "periodic" => Some(Boundary::Periodic),
            _ => None,
        }
    }
}

/// Why a lattice could not be built; the reader turns it into a [`crate::Problem`].
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum LatticeError {
    #[error("a {geometry} lattice needs a shape of {expected} positive integers, got {got:?}")]
    Shape {
        geometry: &'static str,
        expected: usize,
        got: Vec<usize>,
    },
    #[error("a periodic boundary needs at least 3 sites along every axis, got shape {0:?}")]
    PeriodicTooSmall(Vec<usize>),
    #[error("bond {index} is [{a}, {b}]: sites must be below n_sites = {n}")]
    BondOutOfRange {
        index: usize,
        a: usize,
        b: usize,
        n: usize,
    },
    #[error("bond {index} joins site {a} to itself")]
    SelfBond { index: usize, a: usize },
    #[error("bond {index} repeats bond {first} ([{a}, {b}])")]
    DuplicateBond {
        index: usize,
        first: usize,
        a: usize,
        b: usize,
    },
    #[error("the lattice has {0} sites; at most 2^32 - 1 are supported")]
    TooLarge(usize),
}

/// A lattice: its sites and bonds, with neighbour lists.
#[derive(Debug, Clone, PartialEq)]
pub struct Lattice {
    geometry: Geometry,
    shape: Vec<usize>,
    boundary: Boundary,
    n_sites: usize,
    bonds: Vec<[u32; 2]>,
    /// CSR offsets: the neighbours of site `s` are `adjacency[offsets[s]..offsets[s + 1]]`.
    offsets: Vec<u32>,
    /// `(neighbour, bond index)` pairs.
    adjacency: Vec<(u32, u32)>,
}

impl Lattice {
    /// A chain, square or cubic lattice of the given shape.
    pub fn regular(
        geometry: Geometry,
        shape: &[usize],
        boundary: Boundary,
    ) -> Result<Lattice, LatticeError> {
        let d = geometry.dimension();
        if d == 0 || shape.len() != d || shape.contains(&0) {
            return Err(LatticeError::Shape {
                geometry: geometry.as_str(),
                expected: d,
                got: shape.to_vec(),
            });
        }
        if boundary == Boundary::Periodic && shape.iter().any(|&l| l < 3) {
            return Err(LatticeError::PeriodicTooSmall(shape.to_vec()));
        }
        let n_sites = shape
            .iter()
            .try_fold(1usize, |acc, &l| acc.checked_mul(l))
            .filter(|&n| n < u32::MAX as usize)
            .ok_or(LatticeError::TooLarge(usize::MAX))?;
        // strides[a] is the index step one site forward along axis a (row-major).
        let mut strides = vec![1usize; d];
        for a in (0..d.saturating_sub(1)).rev() {
            strides[a] = strides[a + 1] * shape[a + 1];
        }
        let mut bonds = Vec::with_capacity(n_sites * d);
        for s in 0..n_sites {
            for a in 0..d {
                let coord = (s / strides[a]) % shape[a];
                let forward = if coord + 1 < shape[a] {
                    Some(s + strides[a])
                } else if boundary == Boundary::Periodic {
                    Some(s + strides[a] - shape[a] * strides[a])
                } else {
                    None
                };
                if let Some(t) = forward {
                    bonds.push([s as u32, t as u32]);
                }
            }
        }
        Ok(Self::from_parts(
            geometry,
            shape.to_vec(),
            boundary,
            n_sites,
            bonds,
        ))
    }

    /// A graph with explicit bonds, kept in the order given.
    pub fn graph(
        n_sites: usize,
        bonds: &[[usize; 2]],
        boundary: Boundary,
    ) -> Result<Lattice, LatticeError> {
        if n_sites >= u32::MAX as usize {
            return Err(LatticeError::TooLarge(n_sites));
        }
        let mut seen = std::collections::HashMap::with_capacity(bonds.len());
        let mut out = Vec::with_capacity(bonds.len());
        for (index, &[a, b]) in bonds.iter().enumerate() {
            if a >= n_sites || b >= n_sites {
                return Err(LatticeError::BondOutOfRange {
                    index,
                    a,
                    b,
                    n: n_sites,
                });
            }
            if a == b {
                return Err(LatticeError::SelfBond { index, a });
            }
            if let Some(&first) = seen.get(&(a.min(b), a.max(b))) {
                return Err(LatticeError::DuplicateBond { index, first, a, b });
            }
            seen.insert((a.min(b), a.max(b)), index);
            out.push([a as u32, b as u32]);
        }
        Ok(Self::from_parts(
            Geometry::Graph,
            Vec::new(),
            boundary,
            n_sites,
            out,
        ))
    }

    fn from_parts(
        geometry: Geometry,
        shape: Vec<usize>,
        boundary: Boundary,
        n_sites: usize,
        bonds: Vec<[u32; 2]>,
    ) -> Lattice {
        let mut degree = vec![0u32; n_sites + 1];
        for &[a, b] in &bonds {
            degree[a as usize + 1] += 1;
            degree[b as usize + 1] += 1;
        }
        let mut offsets = degree;
        for s in 0..n_sites {
            offsets[s + 1] += offsets[s];
        }
        let mut fill = offsets.clone();
        let mut adjacency = vec![(0u32, 0u32); bonds.len() * 2];
        for (e, &[a, b]) in bonds.iter().enumerate() {
            adjacency[fill[a as usize] as usize] = (b, e as u32);
            fill[a as usize] += 1;
            adjacency[fill[b as usize] as usize] = (a, e as u32);
            fill[b as usize] += 1;
        }
        Lattice {
            geometry,
            shape,
            boundary,
            n_sites,
            bonds,
            offsets,
            adjacency,
        }
    }

    /// The geometry.
    pub fn geometry(&self) -> Geometry {
        self.geometry
    }

    /// The shape (`[n]`, `[Lx, Ly]`, `[Lx, Ly, Lz]`; empty for a graph).
    pub fn shape(&self) -> &[usize] {
        &self.shape
    }

    /// The boundary.
    pub fn boundary(&self) -> Boundary {
        self.boundary
    }

    /// Number of sites.
    pub fn n_sites(&self) -> usize {
        self.n_sites
    }

    /// The bonds, in the documented order.
    pub fn bonds(&self) -> &[[u32; 2]] {
        &self.bonds
    }

    /// Number of bonds.
    pub fn n_bonds(&self) -> usize {
        self.bonds.len()
    }

    /// `(neighbour, bond index)` for every bond at `site`.
    pub fn neighbours(&self, site: usize) -> &[(u32, u32)] {
        let lo = self.offsets[site] as usize;
        let hi = self.offsets[site + 1] as usize;
        &self.adjacency[lo..hi]
    }

    /// Whether the bonds of `other` are exactly those of this lattice, in the same order.
    pub fn same_bonds(&self, other: &[[usize; 2]]) -> bool {
        self.bonds.len() == other.len()
            && self
                .bonds
                .iter()
                .zip(other)
                .all(|(a, b)| a[0] as usize == b[0] && a[1] as usize == b[1])
    }

    /// Graph distance (number of bonds) from the nearest site of `sources` to every site;
    /// `u32::MAX` where a site cannot be reached. Sites out of range in `sources` are ignored.
    pub fn distances_from(&self, sources: &[usize]) -> Vec<u32> {
        self.distances_within(sources, u32::MAX - 1)
    }

    /// As [`Lattice::distances_from`], but the search stops at `max_distance`: sites farther
    /// away are left at `u32::MAX`. This keeps the work proportional to the region explored.
    pub fn distances_within(&self, sources: &[usize], max_distance: u32) -> Vec<u32> {
        let mut dist = vec![u32::MAX; self.n_sites];
        let mut queue = VecDeque::new();
        for &s in sources {
            if s < self.n_sites && dist[s] != 0 {
                dist[s] = 0;
                queue.push_back(s as u32);
            }
        }
        while let Some(s) = queue.pop_front() {
            let d = dist[s as usize];
            if d >= max_distance {
                continue;
            }
            for &(t, _) in self.neighbours(s as usize) {
                if dist[t as usize] == u32::MAX {
                    dist[t as usize] = d + 1;
                    queue.push_back(t);
                }
            }
        }
        dist
    }

    /// Graph distance between two site sets (0 if they share a site; `None` if not connected
    /// or either set is empty).
    pub fn set_distance(&self, a: &[usize], b: &[usize]) -> Option<u32> {
        let dist = self.distances_from(a);
        b.iter()
            .filter(|&&s| s < self.n_sites)
            .map(|&s| dist[s])
            .min()
            .filter(|&d| d != u32::MAX)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn open_chain_has_n_minus_one_bonds_in_order() {
        let l = Lattice::regular(Geometry::Chain, &[4], Boundary::Open).unwrap();
        assert_eq!(l.bonds(), &[[0, 1], [1, 2], [2, 3]]);
    }

    #[test]
    fn periodic_chain_wraps_the_last_bond() {
        let l = Lattice::regular(Geometry::Chain, &[4], Boundary::Periodic).unwrap();
        assert_eq!(l.bonds(), &[[0, 1], [1, 2], [2, 3], [3, 0]]);
    }

    #[test]
    fn square_bonds_follow_site_then_axis_order() {
        // 2 x 3, row-major: site (x, y) = 3x + y.
        let l = Lattice::regular(Geometry::Square, &[2, 3], Boundary::Open).unwrap();
        assert_eq!(
            l.bonds(),
            &[[0, 3], [0, 1], [1, 4], [1, 2], [2, 5], [3, 4], [4, 5]]
        );
    }

    #[test]
    fn bond_counts_match_the_closed_forms() {
        let sq = Lattice::regular(Geometry::Square, &[5, 7], Boundary::Open).unwrap();
        assert_eq!(sq.n_bonds(), 4 * 7 + 5 * 6);
        let sqp = Lattice::regular(Geometry::Square, &[5, 7], Boundary::Periodic).unwrap();
        assert_eq!(sqp.n_bonds(), 2 * 35);
        let cu = Lattice::regular(Geometry::Cubic, &[3, 4, 5], Boundary::Open).unwrap();
        assert_eq!(cu.n_bonds(), 2 * 4 * 5 + 3 * 3 * 5 + 3 * 4 * 4);
        let cup = Lattice::regular(Geometry::Cubic, &[3, 4, 5], Boundary::Periodic).unwrap();
        assert_eq!(cup.n_bonds(), 3 * 60);
        for s in 0..60 {
            assert_eq!(cup.neighbours(s).len(), 6);
        }
    }

    #[test]
    fn distances_on_a_periodic_square_lattice_are_manhattan_with_wrap() {
        let l = Lattice::regular(Geometry::Square, &[6, 6], Boundary::Periodic).unwrap();
        let d = l.distances_from(&[0]);
        for x in 0..6usize {
            for y in 0..6usize {
                let expect = x.min(6 - x) + y.min(6 - y);
                assert_eq!(d[6 * x + y] as usize, expect);
            }
        }
        assert_eq!(l.set_distance(&[0], &[21]), Some(6));
        assert_eq!(l.set_distance(&[0, 21], &[21]), Some(0));
    }

    #[test]
    fn bounded_search_stops_at_the_radius() {
        let l = Lattice::regular(Geometry::Chain, &[10], Boundary::Open).unwrap();
        let d = l.distances_within(&[5], 2);
        assert_eq!(d[3], 2);
        assert_eq!(d[7], 2);
        assert_eq!(d[2], u32::MAX);
        assert_eq!(d[9], u32::MAX);
    }

    #[test]
    fn graph_rejects_bad_bonds() {
        assert!(matches!(
            Lattice::graph(3, &[[0, 3]], Boundary::Open),
            Err(LatticeError::BondOutOfRange { .. })
        ));
        assert!(matches!(
            Lattice::graph(3, &[[1, 1]], Boundary::Open),
            Err(LatticeError::SelfBond { .. })
        ));
        assert!(matches!(
            Lattice::graph(3, &[[0, 1], [1, 0]], Boundary::Open),
            Err(LatticeError::DuplicateBond { first: 0, .. })
        ));
        let g = Lattice::graph(4, &[[0, 1], [2, 3]], Boundary::Open).unwrap();
        assert_eq!(g.set_distance(&[0], &[3]), None);
    }

    #[test]
    fn periodic_needs_three_sites_per_axis_and_shapes_must_fit() {
        assert!(Lattice::regular(Geometry::Chain, &[2], Boundary::Periodic).is_err());
        assert!(Lattice::regular(Geometry::Square, &[3], Boundary::Open).is_err());
        assert!(Lattice::regular(Geometry::Square, &[3, 0], Boundary::Open).is_err());
    }

    #[test]
    fn a_million_site_square_lattice_builds_and_searches() {
        let l = Lattice::regular(Geometry::Square, &[1000, 1000], Boundary::Open).unwrap();
        assert_eq!(l.n_bonds(), 2 * 1000 * 999);
        let d = l.distances_within(&[500 * 1000 + 500], 10);
        assert_eq!(d.iter().filter(|&&x| x <= 10).count(), 2 * 10 * 11 + 1);
    }
}
