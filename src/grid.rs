//! The uniform Cartesian grid laid over a cross-section, and its fluid/solid classification.
//!
//! Owns: index ↔ coordinate maps, which nodes are fluid, and for every grid link from a fluid
//! node that meets a wall the cut fraction θ (the wall lies θ·h from the node along the link,
//! 0 < θ ≤ 1). θ comes from the exact intersection of the grid line with the true wall
//! ([`Domain::wall_crossings`]), so curved walls are not staircased.
//!
//! Invariant: knows nothing of the PDE or of matrices; it only describes where the walls are.

use crate::error::{Error, Result};
use crate::geometry::{Crossing, Domain, Lattice, Point, WallId};

/// Smallest cut fraction kept. A wall closer than θ_min·h to a node is moved to θ_min·h: the
/// wall moves by at most 1e-3·h, a perturbation of the solution of order 1e-3·h·|∇u|, far below
/// the O(h²) discretisation error at any grid a user can afford, while the diagonal of the
/// operator stays bounded by 1/θ_min (conditioning; see Gibou et al. 2002, section 3, on tiny
/// cells).
pub const THETA_MIN: f64 = 1e-3;

/// Directions of the four grid links of a node.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Dir {
    East = 0,
    West = 1,
    North = 2,
    South = 3,
}

impl Dir {
    pub const ALL: [Dir; 4] = [Dir::East, Dir::West, Dir::North, Dir::South];

    /// Unit vector of the direction.
    pub fn vector(self) -> Point {
        match self {
            Dir::East => [1.0, 0.0],
            Dir::West => [-1.0, 0.0],
            Dir::North => [0.0, 1.0],
            Dir::South => [0.0, -1.0],
        }
    }
}

/// A uniform grid: node (i, j) sits at `origin + (i·h, j·h)`, i < nx, j < ny.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Grid {
    pub origin: Point,
    pub h: f64,
    pub nx: usize,
    pub ny: usize,
}

impl Grid {
    /// A grid of `cells` cells across the longer side of the box `(lo, hi)`, nodes at the cell
    /// centres; the shorter side gets as many cells of the same size as it needs, centred. Like
    /// every grid here it carries one extra ring of nodes outside the box, always solid, so that
    /// every fluid node has all four neighbours inside the grid (branch-free stencil loops).
    pub fn covering(lo: Point, hi: Point, cells: usize) -> Grid {
        Grid::covering_with_offset(lo, hi, cells, [0.0, 0.0])
    }

    /// [`Grid::covering`] with the nodes shifted by a fraction of a cell: `offset` in [0, 1)²
    /// (any real is taken modulo 1) moves every node by `wrap(offset)·h` along each axis, where
    /// wrap(o) = o − round(o) lies in [−½, ½]. A shift of at most half a cell keeps the solid ring
    /// outside the box (at worst on its edge, where a node counts as on the wall and is solid), so
    /// the node counts do not change, while [0, 1) still reaches every placement of the grid
    /// relative to the walls. Offset zero is [`Grid::covering`]. A convergence study varies it
    /// between grids, so that walls falling on grid lines (a rectangle aligned with the grid) do
    /// not make the error look smoother than it is for a general placement.
    pub fn covering_with_offset(lo: Point, hi: Point, cells: usize, offset: [f64; 2]) -> Grid {
        let ext = [hi[0] - lo[0], hi[1] - lo[1]];
        let long = ext[0].max(ext[1]);
        let h = long / cells as f64;
        let n = |e: f64| ((e / h) - 1e-9).ceil().max(1.0) as usize;
        let (nx, ny) = (n(ext[0]) + 2, n(ext[1]) + 2);
        let mid = [0.5 * (lo[0] + hi[0]), 0.5 * (lo[1] + hi[1])];
        let wrap = |o: f64| {
            let o = if o.is_finite() { o } else { 0.0 };
            (o - o.round()) * h
        };
        Grid {
            origin: [
                mid[0] - 0.5 * (nx as f64 - 1.0) * h + wrap(offset[0]),
                mid[1] - 0.5 * (ny as f64 - 1.0) * h + wrap(offset[1]),
            ],
            h,
            nx,
            ny,
        }
    }

    /// [`Grid::covering`] shifted so that the centre of the box lies `placement` (a fraction of a
    /// cell per axis, taken modulo 1) beyond a node. Grids of any number of cells built with the
    /// same placement are geometrically similar about the box centre (the parity of the node
    /// counts, which moves the centred grid of [`Grid::covering`] by half a cell, no longer
    /// matters); a grid-convergence study needs that for Richardson extrapolation, and a
    /// placement away from 0 and ½ keeps walls on symmetry lines off the grid lines.
    pub fn covering_placed(lo: Point, hi: Point, cells: usize, placement: [f64; 2]) -> Grid {
        let g = Grid::covering(lo, hi, cells);
        let mid = [0.5 * (lo[0] + hi[0]), 0.5 * (lo[1] + hi[1])];
        let shift = |d: usize| {
            let now = ((mid[d] - g.origin[d]) / g.h).rem_euclid(1.0);
            let want = if placement[d].is_finite() {
                placement[d]
            } else {
                0.0
            };
            (now - want).rem_euclid(1.0)
        };
        Grid::covering_with_offset(lo, hi, cells, [shift(0), shift(1)])
    }

    /// Cells across and down, without the solid ring.
    pub fn cells(&self) -> (usize, usize) {
        (self.nx - 2, self.ny - 2)
    }

    /// The grid of a fixed lattice (a mask's pixel centres), with the solid ring around it.
    pub fn from_lattice(l: Lattice) -> Grid {
        Grid {
            origin: [l.origin[0] - l.pitch, l.origin[1] - l.pitch],
            h: l.pitch,
            nx: l.nx + 2,
            ny: l.ny + 2,
        }
    }

    pub fn len(&self) -> usize {
        self.nx * self.ny
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    pub fn index(&self, i: usize, j: usize) -> usize {
        j * self.nx + i
    }

    pub fn ij(&self, k: usize) -> (usize, usize) {
        (k % self.nx, k / self.nx)
    }

    pub fn node(&self, i: usize, j: usize) -> Point {
        [
            self.origin[0] + i as f64 * self.h,
            self.origin[1] + j as f64 * self.h,
        ]
    }

    /// The neighbour of node k in direction d, if inside the grid.
    pub fn neighbour(&self, k: usize, d: Dir) -> Option<usize> {
        let (i, j) = self.ij(k);
        match d {
            Dir::East if i + 1 < self.nx => Some(k + 1),
            Dir::West if i > 0 => Some(k - 1),
            Dir::North if j + 1 < self.ny => Some(k + self.nx),
            Dir::South if j > 0 => Some(k - self.nx),
            _ => None,
        }
    }

    /// The neighbour of node k in direction d for a node off the grid's border (every fluid
    /// node: the grid carries a ring of solid nodes), without the bounds test and the division
    /// of [`Grid::neighbour`].
    #[inline]
    pub fn inner_neighbour(&self, k: usize, d: Dir) -> usize {
        match d {
            Dir::East => k + 1,
            Dir::West => k - 1,
            Dir::North => k + self.nx,
            Dir::South => k - self.nx,
        }
    }
}

/// A link from fluid node `node` in direction `dir` that meets a wall at θ·h: wall `wall`
/// ([`WallId`]), which the link meets at an angle whose cosine (to the wall normal) is `cos`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Cut {
    pub node: usize,
    pub dir: Dir,
    pub theta: f64,
    pub wall: WallId,
    /// |cos| of the angle between the link and the wall normal, in (0, 1] (single precision:
    /// only a Robin or Neumann wall reads it, as a factor of its normal derivative).
    pub cos: f32,
}

/// A grid with its nodes classified and its cut links found.
#[derive(Debug, Clone)]
pub struct Classified {
    pub grid: Grid,
    /// Fluid flag per node.
    pub fluid: Vec<bool>,
    /// Every cut link, ordered by node.
    pub cuts: Vec<Cut>,
    /// Index into `cuts` of the first cut of each node (length grid.len() + 1).
    pub cut_start: Vec<u32>,
}

impl Classified {
    /// Cuts of node k.
    pub fn cuts_of(&self, k: usize) -> &[Cut] {
        &self.cuts[self.cut_start[k] as usize..self.cut_start[k + 1] as usize]
    }

    /// θ of node k's link in direction d, or None when the link is regular.
    pub fn theta(&self, k: usize, d: Dir) -> Option<f64> {
        self.cuts_of(k).iter().find(|c| c.dir == d).map(|c| c.theta)
    }

    /// The wall point of a cut.
    pub fn wall_point(&self, c: &Cut) -> Point {
        let (i, j) = self.grid.ij(c.node);
        let p = self.grid.node(i, j);
        let v = c.dir.vector();
        [
            p[0] + c.theta * self.grid.h * v[0],
            p[1] + c.theta * self.grid.h * v[1],
        ]
    }

    pub fn fluid_count(&self) -> usize {
        self.fluid.iter().filter(|&&f| f).count()
    }
}

/// Relative distance (in h) within which a node counts as lying on a wall.
const ON_WALL: f64 = 1e-9;

/// Is the node at s within ON_WALL·h of a crossing? `crossings` sorted.
fn on_wall(crossings: &[f64], s: f64, h: f64) -> bool {
    on_wall_at(crossings, crossings.partition_point(|&c| c < s), s, h)
}

/// [`on_wall`] with `i` = the number of crossings below s, already known.
#[inline]
fn on_wall_at(crossings: &[f64], i: usize, s: f64, h: f64) -> bool {
    let near = |j: usize| {
        crossings
            .get(j)
            .is_some_and(|&c| (c - s).abs() <= ON_WALL * h)
    };
    near(i) || (i > 0 && near(i - 1))
}

/// A cut link's θ and the index of the crossing it ends at (None when the neighbour lies on a
/// wall that the line only touches there).
type LinkCut = Option<(f64, Option<usize>)>;

/// θ of the links of a fluid node at s along a line: (+ direction, − direction), None for a
/// regular link. `plus_fluid` / `minus_fluid` say whether the neighbours are fluid nodes.
fn link_thetas(
    crossings: &[f64],
    s: f64,
    h: f64,
    plus_fluid: bool,
    minus_fluid: bool,
) -> (LinkCut, LinkCut) {
    let i = crossings.partition_point(|&c| c <= s);
    link_thetas_at(crossings, i, s, h, plus_fluid, minus_fluid)
}

/// [`link_thetas`] with `i` = the number of crossings at or below s, already known.
#[inline]
fn link_thetas_at(
    crossings: &[f64],
    i: usize,
    s: f64,
    h: f64,
    plus_fluid: bool,
    minus_fluid: bool,
) -> (LinkCut, LinkCut) {
    // Distances to the nearest walls ahead and behind; θ = distance/h. Most nodes are well
    // away from any wall, so the division is only made when the distance may be below h (the
    // margin keeps the test exactly the θ < 1 of the quotient).
    let ahead = crossings.get(i).map(|&c| (c - s, i));
    let behind = if i > 0 {
        Some((s - crossings[i - 1], i - 1))
    } else {
        None
    };
    let within = |d: f64| d < h * (1.0 + 1e-9) && d / h < 1.0;
    let theta = |d: Option<(f64, usize)>, neighbour_fluid: bool| match d {
        Some((d, at)) if within(d) => Some(((d / h).max(THETA_MIN), Some(at))),
        // No wall within the link: regular if the neighbour is fluid; otherwise the neighbour
        // lies on the wall itself (it was made solid as an on-wall node), θ = 1, on the wall of
        // the nearest crossing beyond it, if any.
        _ if neighbour_fluid => None,
        d => Some((1.0, d.map(|(_, at)| at))),
    };
    (theta(ahead, plus_fluid), theta(behind, minus_fluid))
}

/// Classifies the nodes of `grid` over `domain` and finds every cut link.
///
/// A node is fluid when the parity of the wall crossings before it along its row says so and
/// it does not lie on a wall (within 1e-9·h) along its row or its column; a node on a wall is
/// solid, which is exact (ũ = 0 there), and its neighbours then see the wall at θ = 1. A link
/// between two fluid nodes with a solid sliver between them (a fin thinner than h) is cut at
/// both ends, so no flow leaks through it.
pub fn classify(domain: &dyn Domain, grid: Grid) -> Result<Classified> {
    use rayon::prelude::*;
    let n = grid.len();
    // Node and unknown indices are stored as u32 (operator::Numbering, the thin-node lists).
    if n >= u32::MAX as usize {
        return Err(Error::param(
            "--cells",
            format!(
                "a {} × {} grid has more nodes than this program can number (2³² − 1)",
                grid.nx, grid.ny
            ),
        ));
    }
    let h = grid.h;
    // Rows and columns are independent: in parallel, collected in order (the same result with
    // any number of threads).
    // Per line: the crossing parameters (what the classification reads) and, beside them, the
    // wall and angle of each (what the cuts record).
    let split = |hits: Vec<Crossing>| -> (Vec<f64>, Vec<(WallId, f32)>) {
        hits.iter().map(|c| (c.s, (c.wall, c.cos as f32))).unzip()
    };
    type Lines = (Vec<Vec<f64>>, Vec<Vec<(WallId, f32)>>);
    let (rows, row_walls): Lines = (0..grid.ny)
        .into_par_iter()
        .map(|j| split(domain.wall_hits(grid.node(0, j), [1.0, 0.0])))
        .unzip();
    let (cols, col_walls): Lines = (0..grid.nx)
        .into_par_iter()
        .map(|i| split(domain.wall_hits(grid.node(i, 0), [0.0, 1.0])))
        .unzip();
    let mut fluid = vec![false; n];
    fluid
        .par_chunks_mut(grid.nx)
        .enumerate()
        .for_each(|(j, row)| {
            // Inside when the count of crossings below the node is odd. Along the row the nodes
            // come in order, so the count is carried from node to node instead of searched for
            // (the same predicate).
            let line = &rows[j][..];
            let mut below = 0;
            for (i, f) in row.iter_mut().enumerate() {
                let (sx, sy) = (i as f64 * h, j as f64 * h);
                while below < line.len() && line[below] < sx {
                    below += 1;
                }
                *f = below % 2 == 1 && !on_wall_at(line, below, sx, h) && !on_wall(&cols[i], sy, h);
            }
        });
    // Neighbours from (i, j) directly: Grid::neighbour divides k by nx, which at a million
    // nodes cost more than the rest of the classification.
    let (nx, ny) = (grid.nx, grid.ny);
    let fluid_at = |i: usize, j: usize| fluid[j * nx + i];
    // Cuts per row in parallel, then concatenated in row order.
    let per_row: Vec<(Vec<Cut>, Vec<u32>)> = (0..grid.ny)
        .into_par_iter()
        .map(|j| {
            let mut cuts = Vec::new();
            let mut counts = Vec::with_capacity(grid.nx);
            let line = &rows[j][..];
            // Crossings at or below the node, carried along the row.
            let mut upto = 0;
            for (i, col) in cols.iter().enumerate() {
                let k = grid.index(i, j);
                let before = cuts.len();
                let sx = i as f64 * h;
                while upto < line.len() && line[upto] <= sx {
                    upto += 1;
                }
                if fluid[k] {
                    let (e, w) = link_thetas_at(
                        line,
                        upto,
                        sx,
                        h,
                        i + 1 < nx && fluid_at(i + 1, j),
                        i > 0 && fluid_at(i - 1, j),
                    );
                    let (no, so) = link_thetas(
                        col,
                        j as f64 * h,
                        h,
                        j + 1 < ny && fluid_at(i, j + 1),
                        j > 0 && fluid_at(i, j - 1),
                    );
                    for (d, t, walls) in [
                        (Dir::East, e, &row_walls[j]),
                        (Dir::West, w, &row_walls[j]),
                        (Dir::North, no, &col_walls[i]),
                        (Dir::South, so, &col_walls[i]),
                    ] {
                        if let Some((theta, at)) = t {
                            let (wall, cos) = at.map_or((0, 1.0), |at| walls[at]);
                            cuts.push(Cut {
                                node: k,
                                dir: d,
                                theta,
                                wall,
                                cos,
                            });
                        }
                    }
                }
                counts.push((cuts.len() - before) as u32);
            }
            (cuts, counts)
        })
        .collect();
    let total: usize = per_row.iter().map(|r| r.0.len()).sum();
    if total > u32::MAX as usize {
        return Err(Error::param("--cells", "the grid is too large"));
    }
    let mut cuts = Vec::with_capacity(total);
    let mut cut_start = Vec::with_capacity(n + 1);
    for (row_cuts, counts) in per_row {
        let mut start = cuts.len() as u32;
        for c in counts {
            cut_start.push(start);
            start += c;
        }
        cuts.extend(row_cuts);
    }
    cut_start.push(cuts.len() as u32);
    let mut out = Classified {
        grid,
        fluid,
        cuts,
        cut_start,
    };
    make_links_symmetric(&mut out);
    if out.fluid_count() == 0 {
        return Err(Error::geometry(
            "no grid node lies in the fluid: the cross-section is too thin for the grid \
             (raise --cells)",
        ));
    }
    Ok(out)
}

/// A link is regular only if neither end sees a wall on it. Row and column crossings of a
/// consistent geometry agree, so this changes nothing in practice; it guarantees a symmetric
/// matrix whatever round-off does (an end that saw no wall gets θ = 1).
fn make_links_symmetric(c: &mut Classified) {
    use rayon::prelude::*;
    let g = c.grid;
    let (nx, ny) = (g.nx, g.ny);
    let cc = &*c;
    // Rows in parallel, collected in row order; a node without cuts whose neighbours have none
    // either (nearly all of them) is passed over after four comparisons.
    let has_cuts = |k: usize| cc.cut_start[k] != cc.cut_start[k + 1];
    let extra: Vec<Cut> = (0..ny)
        .into_par_iter()
        .flat_map_iter(|j| {
            let mut row = Vec::new();
            for i in 0..nx {
                let k = j * nx + i;
                if !cc.fluid[k] {
                    continue;
                }
                for (d, back) in [
                    (Dir::East, Dir::West),
                    (Dir::West, Dir::East),
                    (Dir::North, Dir::South),
                    (Dir::South, Dir::North),
                ] {
                    let m = g.inner_neighbour(k, d);
                    if !has_cuts(m) || !cc.fluid[m] || cc.theta(k, d).is_some() {
                        continue;
                    }
                    if let Some(other) = cc.cuts_of(m).iter().find(|c| c.dir == back) {
                        row.push(Cut {
                            node: k,
                            dir: d,
                            theta: 1.0,
                            ..*other
                        });
                    }
                }
            }
            row
        })
        .collect();
    if extra.is_empty() {
        return;
    }
    let mut all: Vec<Cut> = c.cuts.drain(..).chain(extra).collect();
    all.sort_by_key(|cut| (cut.node, cut.dir as u8));
    let mut start = vec![0u32; g.len() + 1];
    for cut in &all {
        start[cut.node + 1] += 1;
    }
    for k in 0..g.len() {
        start[k + 1] += start[k];
    }
    c.cuts = all;
    c.cut_start = start;
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geometry::{Primitive, Shape};

    #[test]
    fn square_has_half_cells_at_every_wall() {
        let s = Shape::new(vec![Primitive::rect([0.0, 0.0], [1.0, 1.0])], vec![]);
        let (lo, hi) = s.bbox();
        let g = Grid::covering(lo, hi, 10);
        let c = classify(&s, g).unwrap();
        assert_eq!(c.fluid_count(), 100);
        assert_eq!(c.cuts.len(), 40);
        assert!(c.cuts.iter().all(|c| (c.theta - 0.5).abs() < 1e-12));
    }

    #[test]
    fn offset_and_placement_move_the_nodes_not_the_counts() {
        let s = Shape::new(vec![Primitive::rect([0.0, 0.0], [1.0, 0.3])], vec![]);
        let (lo, hi) = s.bbox();
        let base = Grid::covering(lo, hi, 10);
        assert_eq!(Grid::covering_with_offset(lo, hi, 10, [0.0, 0.0]), base);
        let g = Grid::covering_with_offset(lo, hi, 10, [0.25, 0.75]);
        assert_eq!((g.nx, g.ny), (base.nx, base.ny));
        assert!((g.origin[0] - base.origin[0] - 0.25 * base.h).abs() < 1e-12);
        assert!((g.origin[1] - base.origin[1] + 0.25 * base.h).abs() < 1e-12);
        // Shifted walls are no longer at θ = ½, yet the fluid count of a 10 × 3 box is kept
        // along x (a quarter-cell shift keeps 10 nodes inside 1.0).
        let c = classify(&s, g).unwrap();
        assert!(c.cuts.iter().any(|c| (c.theta - 0.5).abs() > 0.1));
        // Placement: the box centre sits at the asked fraction of a cell from a node, for odd
        // and even node counts alike.
        for cells in [10, 11, 17, 24] {
            let g = Grid::covering_placed(lo, hi, cells, [0.3, 0.6]);
            let mid = [0.5 * (lo[0] + hi[0]), 0.5 * (lo[1] + hi[1])];
            for (d, want) in [(0, 0.3), (1, 0.6)] {
                let f = ((mid[d] - g.origin[d]) / g.h).rem_euclid(1.0);
                assert!((f - want).abs() < 1e-9, "{cells} cells, axis {d}: {f}");
            }
            let c = classify(&s, g).unwrap();
            assert!(c.fluid_count() > 0);
        }
    }

    #[test]
    fn thin_fin_blocks_links() {
        // A fin of width 0.01 between node columns: both ends cut.
        let s = Shape::new(
            vec![Primitive::rect([0.0, 0.0], [1.0, 1.0])],
            vec![Primitive::rect([0.0, 0.0], [0.01, 0.6])],
        );
        let (lo, hi) = s.bbox();
        let c = classify(&s, Grid::covering(lo, hi, 10)).unwrap();
        // Row through the fin: nodes 4 and 5 are fluid on either side of x = 0.
        let k = c.grid.index(5, 6);
        assert!(c.fluid[k] && c.fluid[k + 1]);
        let t1 = c.theta(k, Dir::East).unwrap();
        let t2 = c.theta(k + 1, Dir::West).unwrap();
        assert!(
            (t1 - 0.45).abs() < 1e-9 && (t2 - 0.45).abs() < 1e-9,
            "{t1} {t2}"
        );
    }
}
