//! The singular behaviour of the solution at sharp corners: singular functions, a smooth
//! cut-off, and the coefficient of the leading singular term extracted from a discrete
//! solution.
//!
//! Owns: [`Singular`] (one singular function of a corner of the walls: harmonic and exponent),
//! the cut-off χ, the singular function S = r^λ·sin(λθ) and its dual s⁻ = r^(−λ)·sin(λθ),
//! [`coefficient`], the coefficient a of u ≈ a·S near the corner, and [`Enrichment`], the
//! enriched solution's parts (values, sources, gradient, exact integrals).
//!
//! # The mathematics
//! At a corner of interior angle α with u = 0 on both (straight) walls, the solution of
//! −∇²u = f is u = a·r^λ·sin(λθ) + a₂·r^(2λ)·sin(2λθ) + (terms in r², r^(3λ), …) with
//! λ = π/α, θ measured in the
//! fluid from one wall (Motz 1946; Fix, Gulati & Wakoff 1973). For a re-entrant corner
//! (α > π, λ < 1) the wall shear ∂u/∂n = a·λ·r^(λ−1) is unbounded. The coefficient follows from
//! Green's second identity with the dual function v = χ·s⁻, which is harmonic where χ = 1 and
//! vanishes on both walls (the "dual singular function" extraction, Blum & Dobrowolski 1982,
//! from memory): over the fluid less a small disc about the corner, whose boundary term tends
//! to a·λ·α = a·π (for the k-th harmonic, exponent kλ: a_k·kπ; the harmonics are orthogonal
//! on (0, α), so each is extracted alone),
//!
//! ```text
//!     a = (1/π)·( ∫ u·∆(χs⁻) dA + ∫ χ·s⁻·f dA ),
//!     ∆(χs⁻) = sin(λθ)·r^(−λ)·( χ″ + (1 − 2λ)·χ′/r ),
//! ```
//!
//! with χ(r) = 1 for r ≤ r₀, 0 for r ≥ r₁ and a degree-9 (C⁴) blend between ([`cutoff`]).
//! The first integral only sees u in the annulus r₀ < r < r₁, away from the corner, where
//! the discrete solution is smooth: the node sum with the cut-cell quadrature weights is
//! second order there. The second is exact for f = 1 over the sector (a 1-D integral in r,
//! Gauss–Legendre). Both need the fluid within r₁ to be the corner's sector: r₁ is below the
//! corner's clear radius ([`crate::geometry::corners::Corner::clear_radius`]).
//!
//! # Curved walls
//! Where a wall is a circular arc, r^λ·sin(λθ) does not vanish on it. The Möbius map
//! ω = z/(1 − ζ·z) ([`wedge_pole`]) takes the corner's two walls, lines or arcs, onto the rays
//! of a straight wedge of the same angle, with ω′(0) = 1; S, s⁻ and χ are taken in ω's polar
//! coordinates, where everything above holds unchanged: S and s⁻ are harmonic in z too and
//! vanish exactly on both walls, Green's identity and the boundary term are the same
//! (∫∂/∂n ds is conformally invariant), and only the area integrals gain the Jacobian
//! |dz/dω|² and the Laplacians the factor |ω′|². The corner's true expansion in z is then
//! a·S(ω) + a₂·S₂(ω) + terms of order r² (the source 1 becomes |dz/dω|² = 1 + O(ρ) in ω), so
//! the treatment keeps its order. Measured on a keyhole of our own (a bore of radius 1 mm
//! and a slot 0.8 mm wide, two 246° corners between a line and an arc), relative errors at
//! 300 / 600 cells against a 1697/2400/3394-cell extrapolation: f·Re 4.7e-6 / 7.1e-7, Nu_H1
//! 6.8e-5 / 1.7e-5, Nu_T 7.4e-5 / 1.9e-5 (order 2.0; the bore is 300 cells across at the
//! default, where a round tube alone is 1.1e-5 and 1.4e-5 off in the Nu), force balance 3.9e-6;
//! untreated (before) f·Re was 3.5e-5 off and the force balance 1.8e-3. Two overlapping bores
//! (two 292° corners between arcs): f·Re 1.9e-6 off at 600 cells, 6.8e-4 untreated. Walls that
//! are neither lines nor arcs (an ellipse's) are not treated.
//!
//! # Measured (2026-12-05, ninth session)
//! References: canalis with the treatment at 1697, 2400 and 3394 cells, extrapolated
//! (tests/corners.rs lists them with their bands). At the default 600 cells the relative
//! errors of f·Re, Nu_H1, Nu_T are 1.9e-6, 6.6e-7, 1.6e-7 on an L-shape (three 1 mm squares);
//! 2.6e-6, 3.0e-6, 6.6e-6 on a T of two rects; 4.3e-6, 1.6e-6, 6.8e-6 on a 2 × 1 mm rectangle
//! with one 0.1 mm fin; 3.9e-6, 1.3e-5, 9.8e-6 on shapes/finned_tube.toml. Orders between 300
//! and 600 cells: 1.97–3.9, but 1.80 and 1.72 for the finned tube's Nu_H1 and Nu_T. The
//! first version (C² cut-off, leading term only) left the finned tube at 1.3e-4, 1.0e-4,
//! 8.6e-5, with errors changing sign from grid to grid; the C⁴ cut-off ([`cutoff`]) removed
//! that, the bulk mean of `heat::nusselt_h1` took Nu_H1 from 2.1e-5 to 1.3e-5, and the second
//! harmonic ([`Singular::harmonics`]) halved f·Re's error (7.6e-6 to 3.9e-6) and moved the
//! Nu by under 2e-6. Before any treatment the L's f·Re was 6e-5 off at
//! 600 cells, the finned tube's 1.9e-4; untreated corners converge at order 2π/α (1.33).
//!
//! What is left on shapes/finned_tube.toml at 300 cells (tenth session): its errors jump from
//! one cell count to the next (f·Re 2.1e-5, 3.8e-5, 6.2e-5, 3.6e-5, 3.6e-5, −3.8e-6, 3.5e-5,
//! 4.7e-6, 6.4e-5 at 292, 294, …, 308 cells; Nu_T −3.5e-5 … −1.1e-5), while eight grid offsets
//! at 300 cells move them by a standard deviation of only 4.6e-6 (the eight fin-tip corners sit
//! at spread places in their cells, so a shift of the whole grid averages out). Untreated the
//! same jumps are 50 times larger (f·Re −2.6e-3 … +6.4e-4). At 600 cells they are gone
//! (Nu_T −7.9e-6 … −9.8e-6 over 580–620 cells): a term of high order in h whose constant
//! depends on where each corner falls in its cell. Unchanged by: twelve enrichment passes, CG
//! to 1e-13, the k = 4 harmonic (exponent 8/3), r₁ at 0.95 of the clear radius, the wall
//! correction off; r₀ at 0.01, 0.05, 0.1 and 0.25 of r₁ gave standard deviations over 292–308
//! cells of 1.4e-5, 1.6e-5, 2.2e-5 and 5.3e-5 in f·Re (0.1 is kept, `INNER_SHARE`: the
//! smaller shares take off only a third of it).
//!
//! Where the grid falls mattered at 600 cells too, and not only at corners: over six offsets
//! (k·(0.13, 0.37) of a cell, k = 0 … 5) the largest relative errors of f·Re, Nu_H1, Nu_T
//! were 9.6e-6, 1.5e-5, 7.8e-6 on the L; 1.7e-5, 3.1e-5, 2.1e-5 on the T; 1.7e-5, 3.6e-5,
//! 2.4e-5 on the rectangle with one fin, the worst always at k = 4, where the straight walls
//! pass about 0.02 of a cell from a row of nodes. A plain rectangle did the same. The cause was
//! the flow integral's quadrature at walls parallel to the grid lines, now corrected
//! (`post::flow_integral`, `post::flow_weights`); the same six offsets now give at most 2.0e-6,
//! 6.6e-7, 1.9e-7 (L); 2.8e-6, 3.4e-6, 6.7e-6 (T); 4.3e-6, 4.2e-6, 8.6e-6 (one fin); 7.1e-6,
//! 1.2e-5, 9.0e-6 (finned tube); 7.3e-7, 1.8e-5, 1.9e-5 (keyhole, whose Nu are its bore's).
//! The third-order term of the flow's ghost correction, (1/6)·u‴·(1 − θ)(2θ − 1)·h³ with the
//! source's gradient in the local fits (tried first), moved the errors by under 1e-7.
//!
//! Invariant: knows the grid and its quadrature weights, nothing of solvers or reports.

use crate::geometry::corners::Corner;
use crate::geometry::Point;
use crate::grid::Classified;
use crate::problem::Numbering;
use nalgebra::Complex;
use std::borrow::Cow;
use std::sync::OnceLock;

/// Panels halving towards a curved corner in [`Singular::mapped_integral`]: the last one ends
/// at r₀/2⁴⁸, whose disc adds under 1e-28 of r₀² to the integrals.
const GRADED_PANELS: usize = 48;

/// Gauss–Legendre nodes and weights on [-1, 1], 8 points.
const GAUSS8: [(f64, f64); 8] = [
    (-0.960_289_856_497_536_3, 0.101_228_536_290_376_26),
    (-0.796_666_477_413_626_7, 0.222_381_034_453_374_47),
    (-0.525_532_409_916_329, 0.313_706_645_877_887_3),
    (-0.183_434_642_495_649_8, 0.362_683_783_378_362),
    (0.183_434_642_495_649_8, 0.362_683_783_378_362),
    (0.525_532_409_916_329, 0.313_706_645_877_887_3),
    (0.796_666_477_413_626_7, 0.222_381_034_453_374_47),
    (0.960_289_856_497_536_3, 0.101_228_536_290_376_26),
];

/// The cut-off χ(r) and its first two derivatives: 1 up to r₀, 0 from r₁, and between them
/// 1 − P(s), s = (r − r₀)/(r₁ − r₀), with P the degree-9 polynomial
/// 126s⁵ − 420s⁶ + 540s⁷ − 315s⁸ + 70s⁹, P′ = 630·s⁴(1 − s)⁴: C⁴ at both ends.
///
/// Why C⁴: the smooth part w carries −a·χS's share of the scheme's truncation error,
/// (h²/12)·(∂⁴ₓ + ∂⁴ᵧ)(χS), and a jump in χ‴ (the quintic C² blend used first) makes that
/// O(h) at the nodes next to r₀ and r₁, an error of order h² whose constant changes sign with
/// where the circles r₀, r₁ fall between nodes. Measured on a 16 mm square with one fin
/// 1 × 3 mm (two 270° tips, r₁ = 0.8 mm), f·Re relative errors at 300, 424, 600, 848, 1200
/// cells against a 2400-cell solve with C⁴: C² −9.7e-5, 7.6e-5, 3.4e-5, −1.1e-5, 3e-7; C³
/// −5.1e-5, 2.9e-6, 9.6e-7, 7.2e-7, 6e-7; C⁴ 1.0e-5, 1.6e-6, 1.5e-6, 9.4e-7, 4.1e-7. C⁴ is
/// kept for the heat-transfer figures: on shapes/finned_tube.toml at 600 cells Nu_H1 and Nu_T
/// are 2.6e-5 and 1.5e-5 off with C³, 2.1e-5 and 9.6e-6 with C⁴. The velocity error of the
/// C² blend peaked on the circle r = r₁ (6.8e-4 of ū at 600 cells, 2e-5 elsewhere).
pub fn cutoff(r: f64, r0: f64, r1: f64) -> (f64, f64, f64) {
    if r <= r0 {
        return (1.0, 0.0, 0.0);
    }
    if r >= r1 {
        return (0.0, 0.0, 0.0);
    }
    let w = r1 - r0;
    let s = (r - r0) / w;
    let st = s * (1.0 - s);
    let p = s.powi(5) * (126.0 - 420.0 * s + 540.0 * s * s - 315.0 * s.powi(3) + 70.0 * s.powi(4));
    let d1 = 630.0 * st.powi(4);
    let d2 = 2520.0 * st.powi(3) * (1.0 - 2.0 * s);
    let (v, d1, d2) = (1.0 - p, -d1 / w, -d2 / (w * w));
    (v, d1, d2)
}

/// One singular function of a re-entrant corner with what the extraction needs: the
/// harmonic k, its exponent λ = k·π/α and the cut-off radii. k = 1 is the corner's leading
/// term, the one reported; higher harmonics are enriched where their exponent is below 2 and
/// not an integer ([`Singular::harmonics`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Singular {
    pub corner: Corner,
    /// k of r^(kπ/α)·sin(kπθ/α).
    pub harmonic: u32,
    /// The exponent k·π/α.
    pub lambda: f64,
    /// The cut-off χ is 1 within r₀ and 0 beyond r₁ (radii of |ω|, the mapped coordinate;
    /// the region |ω| < r₁ lies within the clear radius).
    pub r0: f64,
    pub r1: f64,
    /// ζ of the map ω = z/(1 − ζ·z) that straightens the corner's arcs ([`wedge_pole`]), in
    /// the corner's frame (z = (p − corner)·e^(−i·start)), 1/m; zero between straight walls.
    pub pole: [f64; 2],
}

/// ζ of the Möbius map ω = z/(1 − ζ·z) (z in the corner's frame: the first wall leaves along
/// +x) that takes the corner's two walls, lines or circular arcs through z = 0, onto the two
/// rays θ = 0 and θ = α of a straight wedge.
///
/// Why it exists: inversion ξ = 1/z takes a circle through 0 with tangent direction e^(iφ)
/// and signed curvature κ (centre i·e^(iφ)/κ) to the line ξ = −i·e^(−iφ)·κ/2 + t·e^(−iφ)
/// (κ = 0: the line through 0 itself). The two walls' lines meet at ξ = ζ, the inverse of the
/// walls' second common point 1/ζ; ω = 1/(ξ − ζ) takes both lines to lines through 0, and
/// being conformal with ω′(0) = 1, keeps the angle α and the walls' directions at the
/// corner. So r^λ·sin(λθ) in ω's polar coordinates is harmonic in z and vanishes exactly on
/// both walls: the singular function of the curved corner, whose expansion in z is
/// r^λ·sin(λθ)·(1 + O(r/|1/ζ|)).
///
/// Corners whose walls are not both lines or arcs (an ellipse) get the straight wedge
/// (ζ = 0); they are not enriched ([`Enrichment::treatable`]).
pub fn wedge_pole(corner: &Corner) -> [f64; 2] {
    let k1 = corner.curvature[0].unwrap_or(0.0);
    let k2 = corner.curvature[1].unwrap_or(0.0);
    if k1 == 0.0 && k2 == 0.0 {
        return [0.0, 0.0];
    }
    let (sa, ca) = corner.angle.sin_cos();
    // Wall j's image: q_j + t·d_j, d₁ = 1, d₂ = e^(−iα).
    let q1 = [0.0, -0.5 * k1];
    let d2 = [ca, -sa];
    let q2 = [-0.5 * k2 * sa, -0.5 * k2 * ca];
    let cross = |a: [f64; 2], b: [f64; 2]| a[0] * b[1] - a[1] * b[0];
    // q₁ + t·d₁ on the second line: t = (q₂ − q₁)×d₂ / (d₁×d₂), d₁×d₂ = −sin α.
    let t = cross([q2[0] - q1[0], q2[1] - q1[1]], d2) / -sa;
    let z = [t, q1[1]];
    if z[0].is_finite() {
        z
    } else {
        // Walls tangent at the corner: no wedge (the cut-off radius becomes 0).
        [f64::INFINITY, 0.0]
    }
}

/// Share of the clear radius used as the cut-off's outer radius r₁.
const CUTOFF_SHARE: f64 = 0.8;
/// The cut-off's inner radius r₀ as a share of r₁. A wide blend keeps ∆(χ·S), the source it
/// adds to the smooth part w, small and smooth: measured on an L-shape (placement of the
/// studies, 216–1641 cells), f·Re at r₀ = r₁/2 converged at orders 0.7–1.4 up to 729 cells
/// (error 9e-5 there) and at 2.5 beyond; at r₀ = r₁/10 at orders 1.7–2.5 throughout (errors
/// 5.7e-4, 2.3e-4, 1.2e-4, 5.2e-5, 1.9e-5, 9e-6 at 216, 324, 486, 729, 1094, 1641 cells
/// against the value extrapolated from the finest), u_max/ū at order 2.0. A floor of 6 grid
/// spacings on r₀ (tried on shapes/finned_tube.toml, whose fins are 1 mm thick, r₁ = 0.8 mm,
/// r₀ 1.5–7.5 spacings at 216–1094 cells) changed f·Re by less than its error from 729 cells
/// on and made the coarser grids worse: not used.
const INNER_SHARE: f64 = 0.1;

/// The cut-off's outer radius r₁ is at most this share of the distance |1/ζ| to the pole of
/// the map of a curved corner ([`wedge_pole`]): within it |ω′(z)| stays within (1 ± 1/4)^∓2
/// of 1 and the region |ω| < r₁ is a slightly distorted disc (canalis's choice).
pub const POLE_SHARE: f64 = 0.25;

/// Harmonics of a corner are enriched up to this exponent ([`Singular::harmonics`]): an r^μ
/// term with μ ≥ 2 costs the scheme no more than its own O(h²).
pub const MAX_ENRICHED_EXPONENT: f64 = 2.0;

impl Singular {
    /// The corner with its cut-off radii: r₁ = 0.8 of the clear radius, at most `max_radius`
    /// (a length of the passage, so that a corner far from every other wall does not reach across
    /// the section), r₀ = r₁/10 ([`INNER_SHARE`]).
    pub fn new(corner: Corner, max_radius: f64) -> Singular {
        Singular::harmonic(corner, max_radius, 1)
    }

    /// The k-th singular function of `corner` (exponent k·π/α), cut off as [`Singular::new`].
    /// On curved walls the map's pole 1/ζ ([`wedge_pole`]) bounds the radius further: r₁ is
    /// at most |1/ζ|/4 ([`POLE_SHARE`]), and the region |ω| < r₁, which reaches out to
    /// r₁/(1 − r₁·|ζ|) in z, stays within the same share of the clear radius.
    pub fn harmonic(corner: Corner, max_radius: f64, k: u32) -> Singular {
        let pole = wedge_pole(&corner);
        let zeta = pole[0].hypot(pole[1]);
        let reach = (CUTOFF_SHARE * corner.clear_radius).min(max_radius);
        let r1 = if zeta == 0.0 {
            reach
        } else if zeta.is_finite() {
            (reach / (1.0 + reach * zeta)).min(POLE_SHARE / zeta)
        } else {
            // Walls tangent at the corner (no wedge): nothing to treat.
            0.0
        };
        let r0 = INNER_SHARE * r1;
        Singular {
            corner,
            harmonic: k,
            lambda: k as f64 * corner.lambda(),
            r0,
            r1,
            pole,
        }
    }

    /// The singular functions enriched at a re-entrant corner: k = 1 and every higher harmonic
    /// whose exponent k·π/α is below [`MAX_ENRICHED_EXPONENT`] and not an integer (an integer
    /// exponent gives a polynomial, smooth on the grid). Each r^μ term left in the smooth part
    /// costs the cut-cell scheme an error of order h^(2μ) with a constant that changes sign
    /// with the corner's place in the cell: measured on shapes/finned_tube.toml (270° fin
    /// tips, k = 1 only) f·Re errors of −8.3e-4, 3.2e-4, 1.4e-4, −4.2e-5, 1.4e-5 at 300, 424,
    /// 600, 848, 1200 cells, the order 8/3 of the r^(4/3) harmonic.
    pub fn harmonics(corner: Corner, max_radius: f64) -> Vec<Singular> {
        let l = corner.lambda();
        (1..)
            .map(|k| (k, k as f64 * l))
            .take_while(|&(k, mu)| k == 1 || mu < MAX_ENRICHED_EXPONENT)
            .filter(|&(k, mu)| k == 1 || (mu - mu.round()).abs() > 1e-6)
            .map(|(k, _)| Singular::harmonic(corner, max_radius, k))
            .collect()
    }

    /// ∫₀^α sin(λθ) dθ = (1 − cos kπ)/λ: 2/λ for odd k, 0 for even.
    fn angular_integral(&self) -> f64 {
        (1.0 - (self.harmonic as f64 * std::f64::consts::PI).cos()) / self.lambda
    }

    /// The boundary term of the extraction, λ·α = k·π (module notes).
    fn extraction_scale(&self) -> f64 {
        self.harmonic as f64 * std::f64::consts::PI
    }

    /// ∫ χ·s⁻ dA over the corner's sector: ∫₀^α sin(λθ) dθ·∫₀^r₁ χ(r)·r^(1−λ) dr (on a
    /// curved corner in ω's coordinates with the map's Jacobian, `Singular::mapped`).
    pub fn dual_source_integral(&self) -> f64 {
        let l = self.lambda;
        if self.pole_size() > 0.0 {
            return self.mapped_integral(-l);
        }
        let inner = self.r0.powf(2.0 - l) / (2.0 - l);
        let (a, b) = (self.r0, self.r1);
        let mut outer = 0.0;
        for &(x, w) in &GAUSS8 {
            let r = 0.5 * (a + b) + 0.5 * (b - a) * x;
            outer += w * cutoff(r, a, b).0 * r.powf(1.0 - l);
        }
        outer *= 0.5 * (b - a);
        self.angular_integral() * (inner + outer)
    }

    /// ∫ χ·S dA over the corner's sector: ∫₀^α sin(λθ) dθ·∫₀^r₁ χ(r)·r^(λ+1) dr, exactly
    /// (the inner disc in closed form, the blend by Gauss–Legendre; on a curved corner in ω's
    /// coordinates with the map's Jacobian, `Singular::mapped`).
    pub fn integral(&self) -> f64 {
        let l = self.lambda;
        if self.pole_size() > 0.0 {
            return self.mapped_integral(l);
        }
        let (a, b) = (self.r0, self.r1);
        let inner = a.powf(2.0 + l) / (2.0 + l);
        let mut outer = 0.0;
        for &(x, w) in &GAUSS8 {
            let r = 0.5 * (a + b) + 0.5 * (b - a) * x;
            outer += w * cutoff(r, a, b).0 * r.powf(1.0 + l);
        }
        self.angular_integral() * (inner + 0.5 * (b - a) * outer)
    }

    /// ∫ ∂(χ·S)/∂n_in ds over both walls: (1 − cos kπ)·∫₀^r₁ χ(r)·λ·r^(λ−1) dr (the wall shear
    /// of the singular part, exactly; ∂S/∂n_in = λ·r^(λ−1) on the wall θ = 0 and
    /// −cos(kπ)·λ·r^(λ−1) on θ = α; on a curved corner the same in ω, where ∫∂/∂n ds is
    /// unchanged by the map).
    pub fn wall_flux(&self) -> f64 {
        let l = self.lambda;
        let (a, b) = (self.r0, self.r1);
        let mut outer = 0.0;
        for &(x, w) in &GAUSS8 {
            let r = 0.5 * (a + b) + 0.5 * (b - a) * x;
            outer += w * cutoff(r, a, b).0 * l * r.powf(l - 1.0);
        }
        (1.0 - (self.harmonic as f64 * std::f64::consts::PI).cos())
            * (a.powf(l) + 0.5 * (b - a) * outer)
    }

    /// ∆(χ·s⁻) at `p` (zero outside the annulus r₀ < r < r₁ and outside the sector): in ω,
    /// times |ω′(z)|² (`Singular::mapped`).
    pub fn dual_laplacian(&self, p: Point) -> f64 {
        let (r, t, dw) = self.mapped(p);
        if r <= self.r0 || r >= self.r1 || t < 0.0 || t > self.corner.angle {
            return 0.0;
        }
        let (_, d1, d2) = cutoff(r, self.r0, self.r1);
        let l = self.lambda;
        (l * t).sin() * r.powf(-l) * (d2 + (1.0 - 2.0 * l) * d1 / r) * dw.norm_sqr()
    }

    /// The map ω = z/(1 − ζ·z) of the corner ([`wedge_pole`]) at `p`: the polar coordinates
    /// (ρ, θ) of ω, θ from the first wall (in [0, α] in the fluid), and ω′(z) = 1/(1 − ζ·z)².
    /// Between straight walls ω = z: the corner's own polar coordinates and ω′ = 1.
    ///
    /// Under a conformal map harmonic functions stay harmonic, ∆_z = |ω′|²·∆_ω, and a normal
    /// derivative integrated along a curve, ∫∂/∂n ds, is the same in both planes.
    fn mapped(&self, p: Point) -> (f64, f64, Complex<f64>) {
        if self.pole == [0.0, 0.0] {
            let (r, t) = self.corner.polar(p);
            return (r, t, Complex::new(1.0, 0.0));
        }
        let c = self.corner.position;
        let z =
            Complex::new(p[0] - c[0], p[1] - c[1]) * Complex::from_polar(1.0, -self.corner.start);
        let den = Complex::new(1.0, 0.0) - Complex::new(self.pole[0], self.pole[1]) * z;
        let w = z / den;
        let t = self.corner.sector_angle(w.im.atan2(w.re));
        (w.norm(), t, (den * den).inv())
    }

    /// |ζ|, 1/m (0 between straight walls).
    fn pole_size(&self) -> f64 {
        self.pole[0].hypot(self.pole[1])
    }

    /// How far from the corner in z the region |ω| < r₁ reaches: r₁/(1 − r₁·|ζ|).
    fn reach(&self) -> f64 {
        self.r1 / (1.0 - self.r1 * self.pole_size())
    }

    /// ∫ χ(ρ)·ρ^μ·sin(λθ) dA_z over the region |ω| < r₁ of a curved corner, dA_z = |dz/dω|²·dA_ω
    /// = |1 + ζ·ω|^(−4)·ρ dρ dθ: 8-point Gauss–Legendre on eight panels in θ, on four panels
    /// of the blend r₀ < ρ < r₁ and on panels halving towards the corner inside r₀
    /// ([`GRADED_PANELS`]; each is smooth on its own scale where ρ^(1+μ) is not), the last bit
    /// with |dz/dω| = 1.
    fn mapped_integral(&self, mu: f64) -> f64 {
        let (a, l) = (self.corner.angle, self.lambda);
        let zeta = Complex::new(self.pole[0], self.pole[1]);
        let angular = |rho: f64| -> f64 {
            let mut sum = 0.0;
            let panel = a / 8.0;
            for k in 0..8 {
                for &(x, wt) in &GAUSS8 {
                    let t = panel * (k as f64 + 0.5 * (1.0 + x));
                    let j =
                        (Complex::new(1.0, 0.0) + zeta * Complex::from_polar(rho, t)).norm_sqr();
                    sum += wt * 0.5 * panel * (l * t).sin() / (j * j);
                }
            }
            sum
        };
        let mut panels: Vec<(f64, f64)> = (0..GRADED_PANELS)
            .map(|k| {
                (
                    self.r0 * 0.5f64.powi(k as i32 + 1),
                    self.r0 * 0.5f64.powi(k as i32),
                )
            })
            .collect();
        let blend = (self.r1 - self.r0) / 4.0;
        panels
            .extend((0..4).map(|k| (self.r0 + k as f64 * blend, self.r0 + (k + 1) as f64 * blend)));
        let mut sum = 0.0;
        for (lo, hi) in panels {
            for &(x, wt) in &GAUSS8 {
                let rho = 0.5 * (lo + hi) + 0.5 * (hi - lo) * x;
                let chi = cutoff(rho, self.r0, self.r1).0;
                sum += wt * 0.5 * (hi - lo) * chi * rho.powf(1.0 + mu) * angular(rho);
            }
        }
        let eps = self.r0 * 0.5f64.powi(GRADED_PANELS as i32);
        sum + self.angular_integral() * eps.powf(2.0 + mu) / (2.0 + mu)
    }
}

impl Singular {
    /// The unknowns near the corner, (unknown, node), row by row: those of the box of nodes
    /// that holds the disc r < r₁ (every node where χ, S or the dual can be nonzero).
    fn unknowns_near<'a>(
        &self,
        c: &'a Classified,
        num: &'a Numbering,
    ) -> impl Iterator<Item = (usize, Point)> + 'a {
        let g = &c.grid;
        let p = self.corner.position;
        let span = (self.reach() / g.h).ceil() as isize + 1;
        let ci = ((p[0] - g.origin[0]) / g.h).round() as isize;
        let cj = ((p[1] - g.origin[1]) / g.h).round() as isize;
        let (i0, i1) = ((ci - span).max(0), (ci + span).min(g.nx as isize - 1));
        let (j0, j1) = ((cj - span).max(0), (cj + span).min(g.ny as isize - 1));
        (j0..=j1)
            .flat_map(move |j| (i0..=i1).map(move |i| (i as usize, j as usize)))
            .filter_map(move |(i, j)| {
                let q = num.unknown_of[g.index(i, j)];
                (q != crate::problem::NO_UNKNOWN).then(|| (q as usize, g.node(i, j)))
            })
    }

    /// χ·S = χ(r)·r^λ·sin(λθ) at `p` (zero outside r₁ and outside the sector; r, θ of ω on a
    /// curved corner, `Singular::mapped`).
    pub fn function(&self, p: Point) -> f64 {
        let (r, t, _) = self.mapped(p);
        if r >= self.r1 || !(0.0..=self.corner.angle).contains(&t) {
            return 0.0;
        }
        let l = self.lambda;
        cutoff(r, self.r0, self.r1).0 * r.powf(l) * (l * t).sin()
    }

    /// χ·s⁻ = χ(r)·r^(−λ)·sin(λθ) at `p`, None outside the region r < r₁ of the sector and at
    /// the corner itself (the points the extraction with a source reads).
    fn dual(&self, p: Point) -> Option<f64> {
        let (r, t, _) = self.mapped(p);
        if r >= self.r1 || r <= 0.0 || !(0.0..=self.corner.angle).contains(&t) {
            return None;
        }
        let l = self.lambda;
        Some(cutoff(r, self.r0, self.r1).0 * r.powf(-l) * (l * t).sin())
    }

    /// ∆(χ·S) = sin(λθ)·r^λ·(χ″ + (1 + 2λ)·χ′/r): zero where χ = 1 (S is harmonic there). On
    /// a curved corner the same in ω, times |ω′(z)|².
    pub fn laplacian(&self, p: Point) -> f64 {
        let (r, t, dw) = self.mapped(p);
        if r <= self.r0 || r >= self.r1 || !(0.0..=self.corner.angle).contains(&t) {
            return 0.0;
        }
        let (_, d1, d2) = cutoff(r, self.r0, self.r1);
        let l = self.lambda;
        (l * t).sin() * r.powf(l) * (d2 + (1.0 + 2.0 * l) * d1 / r) * dw.norm_sqr()
    }

    /// ∇(χ·S) at `p` (Cartesian components). On a curved corner by the chain rule through the
    /// map: ∂ₓf − i·∂ᵧf = (∂_u f − i·∂_v f)·ω′(z), ω = u + iv, in the corner's frame.
    pub fn gradient(&self, p: Point) -> [f64; 2] {
        let (r, t, dw) = self.mapped(p);
        if r >= self.r1 || r <= 0.0 || !(0.0..=self.corner.angle).contains(&t) {
            return [0.0, 0.0];
        }
        let l = self.lambda;
        let (v, d1, _) = cutoff(r, self.r0, self.r1);
        let (sn, cs) = (l * t).sin_cos();
        // ∂/∂r and (1/r)·∂/∂θ of χ·r^λ·sin(λθ).
        let dr = (d1 * r.powf(l) + v * l * r.powf(l - 1.0)) * sn;
        let dt = v * l * r.powf(l - 1.0) * cs;
        if self.pole == [0.0, 0.0] {
            let phi = t + self.corner.start;
            let (s_phi, c_phi) = phi.sin_cos();
            return [dr * c_phi - dt * s_phi, dr * s_phi + dt * c_phi];
        }
        let (st, ct) = t.sin_cos();
        let g = Complex::new(dr * ct - dt * st, -(dr * st + dt * ct)) * dw;
        let (s0, c0) = self.corner.start.sin_cos();
        let (gx, gy) = (g.re, -g.im);
        [gx * c0 - gy * s0, gx * s0 + gy * c0]
    }
}

/// Fewest grid spacings across the cut-off's outer radius for a corner to be treated by
/// [`Enrichment`]: the extraction reads u in the annulus r₁/2 < r < r₁, which needs a few nodes
/// across to be accurate (canalis's choice).
pub const MIN_CUTOFF_CELLS: f64 = 8.0;

/// The flow problem's solution enriched with the singular functions of its re-entrant
/// corners (Fix, Gulati & Wakoff 1973; here with a cut-off and the coefficients by extraction):
///
/// ```text
///     u = Σ_c a_c·χ_c·S_c + w,   −∇²w = f + Σ_c a_c·∆(χ_c·S_c),   w = 0 on the walls,
/// ```
///
/// S_c = r^λ·sin(λθ) vanishing on both walls of corner c (lines, or arcs through the map of
/// [`wedge_pole`]), so w keeps u's wall condition; w lacks the r^λ term and the cut-cell
/// scheme solves it at second order instead of h^(2λ). The a_c are found with the solve by a
/// fixed point: a from the extraction ([`coefficient`]) of the current u, w solved for that
/// a, until a settles. A wrong a is not an inconsistent u (w makes up for it); it only leaves
/// part of the singular term in w, so the iteration converges at once in practice (the
/// change of a falls like h^(2λ) per step) and the figures depend little on its last digits.
#[derive(Debug, Clone, PartialEq)]
pub struct Enrichment {
    pub corners: Vec<Singular>,
    /// a_c of each corner (unit problem, m^(2 − λ)).
    pub a: Vec<f64>,
    /// The singular functions at the unknowns near each corner, evaluated once for the grid the
    /// enrichment is used on ([`Enrichment::table`]).
    table: OnceLock<Vec<Table>>,
}

/// One corner's singular function at the unknowns near it ([`Singular::unknowns_near`], in that
/// order), and ∫χs⁻ dA. Every pass of the fixed point, every extraction and the heat problems read these
/// instead of the map's transcendental functions (a third of a default run on an L-shape).
#[derive(Debug, Clone, PartialEq)]
struct Table {
    nodes: Vec<Near>,
    dual_source_integral: f64,
    /// The grid's spacing and unknown count: a table is only read on its own grid.
    grid: (f64, usize),
}

/// A corner's singular function at one unknown near it.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Near {
    unknown: usize,
    /// χS.
    value: f64,
    /// ∆(χS).
    laplacian: f64,
    /// ∆(χs⁻).
    dual_laplacian: f64,
    /// χs⁻ where the extraction with a source reads it (inside r₁ and the sector, off the
    /// corner itself).
    dual: Option<f64>,
}

impl Enrichment {
    /// The enrichment of `corners`, all coefficients zero.
    pub fn new(corners: Vec<Singular>) -> Enrichment {
        Enrichment {
            a: vec![0.0; corners.len()],
            corners,
            table: OnceLock::new(),
        }
    }

    /// The same corners (and their table) with coefficients zero.
    pub fn zeroed(&self) -> Enrichment {
        Enrichment {
            a: vec![0.0; self.corners.len()],
            ..self.clone()
        }
    }

    /// The corners' [`Table`]s on the grid of `c`: evaluated at the first call and kept; on any
    /// other grid evaluated afresh (not kept).
    fn table(&self, c: &Classified, num: &Numbering) -> Cow<'_, [Table]> {
        let grid = (c.grid.h, num.len());
        let build = || -> Vec<Table> {
            self.corners
                .iter()
                .map(|s| Table {
                    nodes: s
                        .unknowns_near(c, num)
                        .map(|(unknown, x)| Near {
                            unknown,
                            value: s.function(x),
                            laplacian: s.laplacian(x),
                            dual_laplacian: s.dual_laplacian(x),
                            dual: s.dual(x),
                        })
                        .collect(),
                    dual_source_integral: s.dual_source_integral(),
                    grid,
                })
                .collect()
        };
        let kept = self.table.get_or_init(build);
        if kept.iter().all(|k| k.grid == grid) {
            Cow::Borrowed(kept)
        } else {
            Cow::Owned(build())
        }
    }

    /// The singular functions ([`Singular::harmonics`]) of the corners of `corners` that are
    /// treated on a grid of spacing `h` (D_h `dh`): re-entrant, both walls lines or circular
    /// arcs (S vanishes on them, [`wedge_pole`]), and a cut-off of at least
    /// [`MIN_CUTOFF_CELLS`] spacings. Others keep the plain scheme (and its reduced order).
    pub fn treatable(corners: &[Corner], h: f64, dh: f64) -> Vec<Singular> {
        corners
            .iter()
            .filter(|k| k.is_reentrant() && k.walls_are_circles())
            .flat_map(|k| Singular::harmonics(*k, dh))
            .filter(|s| s.r1 >= MIN_CUTOFF_CELLS * h)
            .collect()
    }

    /// Σ_c a_c·χ_c·S_c at every unknown.
    pub fn values(&self, c: &Classified, num: &Numbering) -> Vec<f64> {
        self.sum_at(c, num, |n| n.value)
    }

    /// ∫u dA of the enriched solution u = Σ a·χ·S + w: the singular parts integrated exactly
    /// ([`Singular::integral`]), w by the cut-cell rule of [`crate::post::flow_integral`] with
    /// its h²/24·∫(−∇²w) dA term, ∫(−∇²w) dA = A − Σ a·[`Singular::wall_flux`] (the
    /// divergence theorem on ∆(χS)). The rule's own error on r^λ near the corner is of order
    /// h^(2+λ) with a constant that changes with the corner's place in its cell; w is free of it.
    pub fn flow_integral(&self, c: &Classified, num: &Numbering, u: &[f64], area: f64) -> f64 {
        let part = self.values(c, num);
        let w: Vec<f64> = u.iter().zip(&part).map(|(u, s)| u - s).collect();
        let h2 = c.grid.h * c.grid.h;
        let flux = self.weighted(Singular::wall_flux);
        crate::post::flow_integral(c, num, &w, area) - h2 * flux / 24.0
            + self.weighted(Singular::integral)
    }

    /// Σ_c a_c·g(corner c).
    fn weighted(&self, g: impl Fn(&Singular) -> f64) -> f64 {
        self.corners
            .iter()
            .zip(&self.a)
            .map(|(s, a)| a * g(s))
            .sum()
    }

    /// Σ_c a_c·∆(χ_c·S_c) at every unknown.
    pub fn source(&self, c: &Classified, num: &Numbering) -> Vec<f64> {
        self.sum_at(c, num, |n| n.laplacian)
    }

    /// 1 + Σ_c a_c·∆(χ_c·S_c) at `p`: the source of the smooth part w of the flow.
    pub fn flow_source_at(&self, p: Point) -> f64 {
        1.0 + self.weighted(|s| s.laplacian(p))
    }

    /// Σ_c a_c·∇(χ_c·S_c) at `p`.
    pub fn gradient(&self, p: Point) -> [f64; 2] {
        let mut g = [0.0, 0.0];
        for (s, a) in self.corners.iter().zip(&self.a) {
            let d = s.gradient(p);
            g[0] += a * d[0];
            g[1] += a * d[1];
        }
        g
    }

    /// The coefficients extracted from `u`, the solution of −∇²u = f with f given per unknown
    /// (`source`, bounded near the corner): as [`coefficient`], with ∫χ·s⁻·f dA by the cut-cell
    /// quadrature (its integrand is bounded where f vanishes like r^λ or less: second order).
    pub fn extract_with_source(
        &self,
        c: &Classified,
        num: &Numbering,
        u: &[f64],
        source: &[f64],
        weights: &[f64],
    ) -> Vec<f64> {
        let table = self.table(c, num);
        self.corners
            .iter()
            .zip(table.iter())
            .map(|(s, t)| {
                let mut sum = 0.0;
                for n in &t.nodes {
                    if let Some(dual) = n.dual {
                        let q = n.unknown;
                        sum += weights[q] * (u[q] * n.dual_laplacian + dual * source[q]);
                    }
                }
                sum / s.extraction_scale()
            })
            .collect()
    }

    /// The coefficients extracted from `u` (the whole solution, singular part included).
    pub fn extract(&self, c: &Classified, num: &Numbering, u: &[f64], weights: &[f64]) -> Vec<f64> {
        let table = self.table(c, num);
        self.corners
            .iter()
            .zip(table.iter())
            .map(|(s, t)| {
                let mut sum = 0.0;
                for n in &t.nodes {
                    sum += weights[n.unknown] * u[n.unknown] * n.dual_laplacian;
                }
                (sum + t.dual_source_integral) / s.extraction_scale()
            })
            .collect()
    }

    /// Σ_c a_c·f(table entry) at every unknown.
    fn sum_at(&self, c: &Classified, num: &Numbering, f: impl Fn(&Near) -> f64) -> Vec<f64> {
        let mut out = vec![0.0; num.len()];
        for (t, a) in self.table(c, num).iter().zip(&self.a) {
            for n in &t.nodes {
                out[n.unknown] += a * f(n);
            }
        }
        out
    }
}

/// The coefficient a of u ≈ a·r^λ·sin(λθ) at `s`, from the discrete solution `u` of
/// −∇²u = 1 (module notes): (1/π)·(Σ w_i·u_i·∆(χs⁻)(x_i) + ∫χs⁻ dA), w the cut-cell
/// quadrature weights ([`crate::post::quadrature_weights`], passed in).
pub fn coefficient(
    s: &Singular,
    c: &Classified,
    num: &Numbering,
    u: &[f64],
    weights: &[f64],
) -> f64 {
    let mut sum = 0.0;
    for (q, x) in s.unknowns_near(c, num) {
        sum += weights[q] * u[q] * s.dual_laplacian(x);
    }
    (sum + s.dual_source_integral()) / s.extraction_scale()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cutoff_is_smooth_and_its_derivatives_are_right() {
        let (r0, r1) = (0.5, 1.0);
        for k in 1..50 {
            let r = 0.5 + 0.5 * k as f64 / 50.0;
            let e = 1e-6;
            let (v, d1, d2) = cutoff(r, r0, r1);
            let (vp, d1p, _) = cutoff(r + e, r0, r1);
            let (vm, d1m, _) = cutoff(r - e, r0, r1);
            assert!((d1 - (vp - vm) / (2.0 * e)).abs() < 1e-6);
            assert!((d2 - (d1p - d1m) / (2.0 * e)).abs() < 1e-5);
            assert!((0.0..=1.0).contains(&v));
        }
        assert_eq!(cutoff(0.5, r0, r1), (1.0, 0.0, 0.0));
        assert_eq!(cutoff(1.0, r0, r1), (0.0, 0.0, 0.0));
    }

    #[test]
    fn the_dual_source_integral_matches_a_plain_quadrature() {
        let corner = Corner {
            position: [0.0, 0.0],
            angle: 1.5 * std::f64::consts::PI,
            start: 0.0,
            straight: true,
            curvature: [Some(0.0), Some(0.0)],
            clear_radius: 1.0,
        };
        let s = Singular::new(corner, 10.0);
        // Midpoint rule in r on a fine partition (the r^(1−λ) end is integrable and mild).
        let n = 200_000;
        let l = s.lambda;
        let mut sum = 0.0;
        for k in 0..n {
            let r = (k as f64 + 0.5) / n as f64 * s.r1;
            sum += cutoff(r, s.r0, s.r1).0 * r.powf(1.0 - l);
        }
        sum *= s.r1 / n as f64 * 2.0 / l;
        assert!((sum - s.dual_source_integral()).abs() < 1e-6 * sum, "{sum}");
    }

    fn corner(angle: f64) -> Corner {
        Corner {
            position: [0.3, -0.2],
            angle,
            start: 0.4,
            straight: true,
            curvature: [Some(0.0), Some(0.0)],
            clear_radius: 1.0,
        }
    }

    #[test]
    fn the_harmonics_are_the_non_integer_exponents_below_two() {
        let pi = std::f64::consts::PI;
        let exps = |a: f64| -> Vec<(u32, f64)> {
            Singular::harmonics(corner(a), 10.0)
                .iter()
                .map(|s| (s.harmonic, s.lambda))
                .collect()
        };
        // 270°: 2/3 and 4/3 (2 is a polynomial). Slit: 1/2 and 3/2 (1 is a polynomial).
        let e = exps(1.5 * pi);
        assert_eq!(e.len(), 2);
        assert!((e[0].1 - 2.0 / 3.0).abs() < 1e-12 && (e[1].1 - 4.0 / 3.0).abs() < 1e-12);
        let e = exps(2.0 * pi);
        assert_eq!(e.iter().map(|x| x.0).collect::<Vec<_>>(), vec![1, 3]);
        // 200°: 0.9 and 1.8.
        assert_eq!(exps(200f64.to_radians()).len(), 2);
    }

    #[test]
    fn each_harmonic_is_harmonic_vanishes_on_its_walls_and_integrates_exactly() {
        let c = corner(1.5 * std::f64::consts::PI);
        for s in Singular::harmonics(c, 10.0) {
            let at = |r: f64, t: f64| {
                let phi = t + c.start;
                [c.position[0] + r * phi.cos(), c.position[1] + r * phi.sin()]
            };
            // Zero on both walls, harmonic inside r₀ (five-point Laplacian, step 1e-4).
            for r in [0.05, 0.3, 0.7] {
                assert!(s.function(at(r, 0.0)).abs() < 1e-12);
                assert!(s.function(at(r, c.angle)).abs() < 1e-12);
            }
            let p = at(0.5 * s.r0, 1.0);
            let e = 1e-4;
            let lap = (s.function([p[0] + e, p[1]])
                + s.function([p[0] - e, p[1]])
                + s.function([p[0], p[1] + e])
                + s.function([p[0], p[1] - e])
                - 4.0 * s.function(p))
                / (e * e);
            assert!(lap.abs() < 1e-4, "k = {}: {lap}", s.harmonic);
            // ∫χS dA and ∫∆(χS) dA = −(wall flux) against a polar midpoint rule.
            let (nr, nt) = (4000, 600);
            let (mut int, mut lap_int) = (0.0, 0.0);
            for i in 0..nr {
                let r = (i as f64 + 0.5) / nr as f64 * s.r1;
                for j in 0..nt {
                    let t = (j as f64 + 0.5) / nt as f64 * c.angle;
                    let da = r * (s.r1 / nr as f64) * (c.angle / nt as f64);
                    int += s.function(at(r, t)) * da;
                    lap_int += s.laplacian(at(r, t)) * da;
                }
            }
            assert!(
                (int - s.integral()).abs() < 1e-5 * s.r1.powi(2),
                "k = {}: {int}",
                s.harmonic
            );
            assert!(
                (lap_int + s.wall_flux()).abs() < 1e-4,
                "k = {}: {lap_int} {}",
                s.harmonic,
                s.wall_flux()
            );
        }
    }

    /// The keyhole of our own: a bore of radius 1 and a slot 0.8 wide along +x, whose edges
    /// meet the bore at two 246° corners between a line and an arc.
    fn keyhole_corners() -> Vec<Corner> {
        use crate::geometry::{Primitive, Shape};
        let shape = Shape::new(
            vec![
                Primitive::Circle {
                    center: [0.0, 0.0],
                    radius: 1.0,
                },
                Primitive::rect([1.5, 0.0], [3.0, 0.8]),
            ],
            vec![],
        );
        shape
            .corners()
            .into_iter()
            .filter(Corner::is_reentrant)
            .collect()
    }

    #[test]
    fn walls_tangent_at_the_corner_give_no_cut_off() {
        // Two arcs of a slit (α = 2π, sin α = 0 up to round-off): their images are parallel,
        // no wedge (the pole at infinity, or at 1e16 from round-off).
        let c = Corner {
            position: [0.0, 0.0],
            angle: 2.0 * std::f64::consts::PI,
            start: 0.0,
            straight: false,
            curvature: [Some(1.0), Some(2.0)],
            clear_radius: 1.0,
        };
        let s = Singular::new(c, 10.0);
        assert!(s.r1 < 1e-12, "{}", s.r1);
        assert!(s.reach().is_finite());
        assert_eq!(s.function([0.1, 0.1]), 0.0);
        assert!(Enrichment::treatable(&[c], 1e-3, 1.0).is_empty());
    }

    #[test]
    fn a_line_and_an_arc_map_onto_a_wedge_whose_pole_is_their_second_meeting() {
        let corners = keyhole_corners();
        assert_eq!(corners.len(), 2, "{corners:?}");
        let x0 = 0.84f64.sqrt();
        for c in &corners {
            assert!(c.walls_are_circles() && !c.straight);
            let z = wedge_pole(c);
            // 1/ζ in the corner's frame, back in the plane: the slot's edge line meets the
            // bore again at (−x0, ±0.4).
            let m = z[0] * z[0] + z[1] * z[1];
            let local = [z[0] / m, -z[1] / m];
            let (sn, cs) = c.start.sin_cos();
            let p = [
                c.position[0] + local[0] * cs - local[1] * sn,
                c.position[1] + local[0] * sn + local[1] * cs,
            ];
            assert!(
                (p[0] + x0).abs() < 1e-9 && (p[1] - c.position[1]).abs() < 1e-9,
                "{p:?}"
            );
        }
    }

    #[test]
    fn on_curved_walls_each_harmonic_vanishes_is_harmonic_and_integrates_exactly() {
        for c in keyhole_corners() {
            for s in Singular::harmonics(c, 10.0) {
                assert!(s.pole_size() > 0.0 && s.r1 > 0.1, "{s:?}");
                // Zero on the bore's wall and on the slot's edge near the corner.
                let y = c.position[1];
                for k in 1..20 {
                    let d = k as f64 / 20.0 * s.reach();
                    let phi = y.atan2(c.position[0]) + d * y.signum();
                    let on_arc = [phi.cos(), phi.sin()];
                    let on_line = [c.position[0] + d, y];
                    assert!(
                        s.function(on_arc).abs() < 1e-12,
                        "arc {d}: {}",
                        s.function(on_arc)
                    );
                    assert!(s.function(on_line).abs() < 1e-12, "line {d}");
                }
                let inside = [c.position[0] + 0.3 * s.r1, y - 0.5 * s.r1 * y.signum()];
                let e = 1e-4;
                let lap = |p: Point| {
                    (s.function([p[0] + e, p[1]])
                        + s.function([p[0] - e, p[1]])
                        + s.function([p[0], p[1] + e])
                        + s.function([p[0], p[1] - e])
                        - 4.0 * s.function(p))
                        / (e * e)
                };
                // Harmonic inside r₀; in the blend ∆(χS) agrees with the five-point value, and
                // the gradient with central differences.
                let near = [c.position[0] - 0.05 * s.r1, y - 0.05 * s.r1 * y.signum()];
                assert!(s.function(near) != 0.0);
                assert!(lap(near).abs() < 1e-3, "k = {}: {}", s.harmonic, lap(near));
                let blend = [c.position[0], y - 0.6 * s.r1 * y.signum()];
                assert!(s.laplacian(blend) != 0.0);
                assert!(
                    (lap(blend) - s.laplacian(blend)).abs()
                        < 1e-5 * s.laplacian(blend).abs().max(1.0),
                    "k = {}: {} {}",
                    s.harmonic,
                    lap(blend),
                    s.laplacian(blend)
                );
                for p in [inside, blend] {
                    let g = s.gradient(p);
                    let gx =
                        (s.function([p[0] + e, p[1]]) - s.function([p[0] - e, p[1]])) / (2.0 * e);
                    let gy =
                        (s.function([p[0], p[1] + e]) - s.function([p[0], p[1] - e])) / (2.0 * e);
                    assert!(
                        (g[0] - gx).abs() < 1e-6 && (g[1] - gy).abs() < 1e-6,
                        "{g:?} {gx} {gy}"
                    );
                }
                // ∫χS dA, ∫χs⁻ dA and ∫∆(χS) dA = −(wall flux) against a polar midpoint rule
                // in z about the corner.
                let (nr, nt) = (3000, 1600);
                let (mut int, mut dual, mut lap_int) = (0.0, 0.0, 0.0);
                let reach = s.reach();
                let l = s.lambda;
                for i in 0..nr {
                    let r = (i as f64 + 0.5) / nr as f64 * reach;
                    for j in 0..nt {
                        let t = (j as f64 + 0.5) / nt as f64 * 2.0 * std::f64::consts::PI;
                        let p = [c.position[0] + r * t.cos(), c.position[1] + r * t.sin()];
                        let da = r * (reach / nr as f64) * (2.0 * std::f64::consts::PI / nt as f64);
                        int += s.function(p) * da;
                        lap_int += s.laplacian(p) * da;
                        let (rho, th, _) = s.mapped(p);
                        if rho < s.r1 && (0.0..=c.angle).contains(&th) {
                            dual += cutoff(rho, s.r0, s.r1).0 * rho.powf(-l) * (l * th).sin() * da;
                        }
                    }
                }
                let scale = s.r1.powf(2.0 + l);
                assert!(
                    (int - s.integral()).abs() < 1e-5 * scale,
                    "k = {}: {int} {}",
                    s.harmonic,
                    s.integral()
                );
                let dscale = s.r1.powf(2.0 - l);
                assert!(
                    (dual - s.dual_source_integral()).abs() < 1e-4 * dscale,
                    "k = {}: {dual} {}",
                    s.harmonic,
                    s.dual_source_integral()
                );
                assert!(
                    (lap_int + s.wall_flux()).abs() < 1e-4 * s.r1.powf(l),
                    "k = {}: {lap_int} {}",
                    s.harmonic,
                    s.wall_flux()
                );
            }
        }
    }
}
