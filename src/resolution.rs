//! How well a classified grid resolves its cross-section, measured before any solve.
//!
//! Owns: per passage of the grid (fluid nodes joined by regular links, as
//! [`crate::post::passage_labels`] numbers them), its node count and its *nodes across*: the
//! largest, over the passage's nodes, of the shorter of the two runs of fluid nodes through the
//! node (along its row and along its column, a run ending at a cut link). A passage n nodes
//! across is at most about (n + 1)·h wide in its widest place; the flow of a passage fewer than
//! [`MIN_NODES_ACROSS`] nodes across is not resolved (a 1000:1 slot one cell high, a
//! one-pixel channel of a mask). Also the thinnest wall between two fluid nodes: a link cut on
//! both sides, whose wall thickness h·(1 − θ₁ − θ₂) is exact up to the clamp of θ
//! ([`crate::grid::THETA_MIN`]).
//!
//! Cost: two passes over the grid and one over the cut links, O(nodes); measured at 0.5–2 % of
//! the default solve of the shipped examples (DEVELOPERS.md, "Hostile inputs").
//!
//! Invariant: reads a classified grid only; knows no geometry format, no PDE, no solver.

use crate::geometry::Point;
use crate::grid::{Classified, Dir};

/// Fewest nodes across a passage for its figures to be trusted. A square of 4 × 4 nodes has
/// f·Re within a few per cent of its limit with the cut-cell scheme's second order (the coarse
/// grids of tests/verification.rs); below that the error bars of the cheap estimate, which
/// assume the asymptotic range, are not reliable.
pub const MIN_NODES_ACROSS: usize = 4;

/// Walls between two fluid nodes thinner than this fraction of the grid spacing are not
/// resolved: the local fits of the wall shear and the wall correction see fluid on both sides
/// of them within one cell, and the perimeter of a wall thinner than about 1e-9 of the
/// cross-section is lost altogether (a 1 m square split by a 1 nm wall reported f·Re 35, true
/// 15.55).
pub const MIN_WALL_CELLS: f64 = 0.5;

/// A passage of fewer than this share of the fluid nodes and fewer than [`MIN_NODES_ACROSS`]
/// nodes across is a sliver (a thin gap the grid cut off from its passage, or a real passage
/// too small to matter): reported apart, not rated.
pub const SLIVER_SHARE: f64 = 1e-3;

/// One passage of the grid as the resolution check sees it.
#[derive(Debug, Clone, PartialEq)]
pub struct PassageResolution {
    /// The label of [`crate::post::passage_labels`].
    pub label: u32,
    /// Fluid nodes of the passage.
    pub nodes: usize,
    /// Nodes across at the widest place (see the module doc).
    pub across: usize,
    /// A node of the passage at its widest place, metres (for messages).
    pub position: Point,
}

impl PassageResolution {
    /// A passage too small to matter: fewer than [`MIN_NODES_ACROSS`] across and fewer than
    /// [`SLIVER_SHARE`] of all `total_nodes` fluid nodes.
    pub fn is_sliver(&self, total_nodes: usize) -> bool {
        self.across < MIN_NODES_ACROSS && (self.nodes as f64) < SLIVER_SHARE * total_nodes as f64
    }
}

/// A wall between two fluid nodes, thinner than a cell.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ThinWall {
    /// Thickness along the grid line, metres.
    pub thickness: f64,
    /// The middle of the wall on that line, metres.
    pub position: Point,
}

/// What the resolution check measured on one grid.
#[derive(Debug, Clone, PartialEq)]
pub struct Resolution {
    /// Grid spacing, metres.
    pub h: f64,
    /// Fluid nodes in all.
    pub fluid_nodes: usize,
    /// Every passage, in label order.
    pub passages: Vec<PassageResolution>,
    /// The thinnest wall between two fluid nodes thinner than [`MIN_WALL_CELLS`] cells, if
    /// any (a wall at least three links long; see [`measure`]).
    pub thinnest_wall: Option<ThinWall>,
}

impl Resolution {
    /// The passages that are not slivers but fewer than [`MIN_NODES_ACROSS`] nodes across.
    pub fn unresolved(&self) -> impl Iterator<Item = &PassageResolution> {
        self.passages
            .iter()
            .filter(|p| p.across < MIN_NODES_ACROSS && !p.is_sliver(self.fluid_nodes))
    }

    /// Labels of the sliver passages.
    pub fn slivers(&self) -> Vec<u32> {
        self.passages
            .iter()
            .filter(|p| p.is_sliver(self.fluid_nodes))
            .map(|p| p.label)
            .collect()
    }
}

/// Measures `c` (see the module doc). `label` and `count` are those of
/// [`crate::post::passage_labels`].
pub fn measure(c: &Classified, label: &[u32], count: usize) -> Resolution {
    let g = &c.grid;
    let n = g.len();
    // Run lengths along rows, then along columns: a run continues over a regular link between
    // two fluid nodes.
    let mut hrun = vec![0u32; n];
    let mut vrun = vec![0u32; n];
    let runs = |run: &mut [u32],
                lines: usize,
                len: usize,
                at: &dyn Fn(usize, usize) -> usize,
                step: Dir| {
        for line in 0..lines {
            let mut start = 0;
            while start < len {
                let k = at(line, start);
                if !c.fluid[k] {
                    start += 1;
                    continue;
                }
                let mut end = start + 1;
                while end < len
                    && c.fluid[at(line, end)]
                    && c.theta(at(line, end - 1), step).is_none()
                {
                    end += 1;
                }
                let l = (end - start) as u32;
                for m in start..end {
                    run[at(line, m)] = l;
                }
                start = end;
            }
        }
    };
    runs(&mut hrun, g.ny, g.nx, &|j, i| g.index(i, j), Dir::East);
    runs(&mut vrun, g.nx, g.ny, &|i, j| g.index(i, j), Dir::North);
    let mut passages: Vec<PassageResolution> = (0..count)
        .map(|l| PassageResolution {
            label: l as u32,
            nodes: 0,
            across: 0,
            position: [f64::NAN; 2],
        })
        .collect();
    let mut fluid_nodes = 0;
    for k in 0..n {
        let l = label[k];
        if l == u32::MAX {
            continue;
        }
        fluid_nodes += 1;
        let p = &mut passages[l as usize];
        p.nodes += 1;
        let across = hrun[k].min(vrun[k]) as usize;
        if across > p.across || p.position[0].is_nan() {
            p.across = p.across.max(across);
            let (i, j) = g.ij(k);
            p.position = g.node(i, j);
        }
    }
    // Walls between two fluid nodes: a link cut from both ends, thinner than MIN_WALL_CELLS·h.
    // A link that clips the corner of a thick wall is cut from both ends too; a wall is one
    // only where such links continue on both neighbouring grid lines (a wall at least three
    // links long), which a corner never does.
    let mut thin: Vec<(usize, usize, Dir, ThinWall)> = Vec::new();
    for cut in &c.cuts {
        if !matches!(cut.dir, Dir::East | Dir::North) {
            continue;
        }
        let Some(m) = g.neighbour(cut.node, cut.dir) else {
            continue;
        };
        if !c.fluid[m] {
            continue;
        }
        let back = if cut.dir == Dir::East {
            Dir::West
        } else {
            Dir::South
        };
        let Some(theta_back) = c.theta(m, back) else {
            continue;
        };
        let thickness = (g.h * (1.0 - cut.theta - theta_back)).max(0.0);
        if thickness >= MIN_WALL_CELLS * g.h {
            continue;
        }
        let (i, j) = g.ij(cut.node);
        let p = g.node(i, j);
        let v = cut.dir.vector();
        let mid = cut.theta + 0.5 * (1.0 - cut.theta - theta_back);
        thin.push((
            i,
            j,
            cut.dir,
            ThinWall {
                thickness,
                position: [p[0] + mid * g.h * v[0], p[1] + mid * g.h * v[1]],
            },
        ));
    }
    let links: std::collections::HashSet<(usize, usize, u8)> =
        thin.iter().map(|&(i, j, d, _)| (i, j, d as u8)).collect();
    let continued = |i: usize, j: usize, d: Dir, side: isize| {
        // The neighbouring line across the wall's direction: rows for an East link, columns
        // for a North one; the wall may lean by one node.
        (-1isize..=1).any(|lean| {
            let (a, b) = if d == Dir::East {
                (i as isize + lean, j as isize + side)
            } else {
                (i as isize + side, j as isize + lean)
            };
            a >= 0 && b >= 0 && links.contains(&(a as usize, b as usize, d as u8))
        })
    };
    let thinnest = thin
        .iter()
        .filter(|&&(i, j, d, _)| continued(i, j, d, -1) && continued(i, j, d, 1))
        .map(|t| t.3)
        .min_by(|a, b| a.thickness.total_cmp(&b.thickness));
    Resolution {
        h: g.h,
        fluid_nodes,
        passages,
        thinnest_wall: thinnest,
    }
}
