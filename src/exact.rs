//! Exact solutions of the unit problem for the verification cases.
//!
//! Owns: the closed-form (or rapidly convergent series) solutions of
//!
//! ```text
//!     −∇²ũ = 1 in the cross-section,   ũ = 0 on every wall,
//! ```
//!
//! i.e. fully developed laminar duct flow scaled so that G/μ = 1 (ũ in m², ∫ũ dA in m⁴ when the
//! lengths are metres), for six cross-sections, together with their exact figures of merit:
//! A (area), P (wetted perimeter), D_h = 4A/P, I = ∫ũ dA, ū = I/A,
//! Fanning f·Re = D_h²·A/(2·I) (16 for a circle; Darcy is 4·f·Re), u_max/ū, and the local wall
//! shear of the unit problem τ̃ = ∂ũ/∂n (inward normal) = |∇ũ| at the wall, whose perimeter mean
//! is A/P exactly (force balance).
//!
//! Used by the `verify` command and the verification tests. Invariant: depends on nothing but
//! the geometry types (for [`Shape`]); in particular not on the grid, operator or solver.
//!
//! The solutions (all classical; collected e.g. in Shah & London, *Laminar Flow Forced
//! Convection in Ducts*, Academic Press 1978):
//!
//! * Circle of radius R (Hagen–Poiseuille): ũ = (R² − r²)/4, I = πR⁴/8.
//! * Ellipse with semi-axes a, b: ũ = a²b²/(2(a²+b²))·(1 − x²/a² − y²/b²),
//!   I = πa³b³/(4(a²+b²)), hence f·Re = 32π²(a²+b²)/P² with the exact perimeter
//!   P = ∫₀^{2π} √(a² sin²θ + b² cos²θ) dθ evaluated by the periodic trapezoidal rule (spectrally
//!   accurate for a smooth periodic integrand; iterated to round-off).
//! * Equilateral triangle of side s and height H = √3 s/2: with d₁, d₂, d₃ the distances to the
//!   three sides (d₁ + d₂ + d₃ = H inside), ũ = d₁d₂d₃/H. Indeed ∇²(d₁d₂d₃) =
//!   2Σ_{i<j} (nᵢ·nⱼ)·d_k = −(d₁ + d₂ + d₃) = −H since nᵢ·nⱼ = cos 120° = −½. In barycentric
//!   coordinates dᵢ = Hλᵢ and ∫λ₁λ₂λ₃ dA = A/60, so I = H²A/60 = √3 s⁴/320; the maximum is at the
//!   centroid, ũ_max = H²/27; f·Re = 40/3, u_max/ū = 20/9.
//! * Rectangle w × h, corner at the origin: with the parabola across h,
//!   ũ = y(h − y)/2 − Σ_{n odd} 4h²/(π³n³)·sin(nπy/h)·cosh(nπ(x − w/2)/h)/cosh(nπw/(2h)),
//!   and I = w h³/12 − (16 h⁴/π⁵)·Σ_{n odd} tanh(nπw/(2h))/n⁵ (the same series with the roles of
//!   w and h exchanged is equally exact). For the flow integral the parabola is put across the
//!   shorter side and Σ tanh/n⁵ is split as (31/32)ζ(5) − Σ (1 − tanh)/n⁵, whose second part
//!   decays like e^{−nπw/h}: converged to round-off in a few terms.
//! * Concentric annulus r_i < r < r_o, L = ln(r_o/r_i):
//!   ũ = (r_o² − r²)/4 + (r_o² − r_i²)·ln(r/r_o)/(4L),
//!   I = (π/8)(r_o² − r_i²)·(r_o² + r_i² − (r_o² − r_i²)/L), maximum at r_m² = (r_o² − r_i²)/(2L).

use crate::geometry::{Point, Primitive, Shape};
use std::f64::consts::PI;

/// ζ(5) = 1.0369277551433699263…, rounded to double precision. Checked against a direct sum in the tests.
const ZETA5: f64 = 1.036_927_755_143_37;

/// Offset of every case from the origin, as a fraction of its size: keeps the walls off the
/// symmetry lines of a grid centred on the origin.
const SHIFT: Point = [0.013, -0.027];

/// Largest odd index summed in the two-dimensional rectangle series (a cap reached only within
/// a tiny distance of a corner, where ũ and |∇ũ| vanish anyway).
const RECT_MAX_N: usize = 400_001;

/// One verification case: a cross-section and its exact figures of merit for the unit problem.
#[derive(Debug, Clone, PartialEq)]
pub struct ExactCase {
    /// Short key, e.g. "circle".
    pub key: &'static str,
    /// Human title with the size, e.g. "circle d = 1".
    pub title: String,
    /// The cross-section, lengths in metres.
    pub shape: Shape,
    /// Exact fluid area A, m².
    pub area: f64,
    /// Exact wetted perimeter P, m.
    pub perimeter: f64,
    /// Exact I = ∫ũ dA of the unit problem, m⁴.
    pub flow_integral: f64,
    /// Exact Fanning f·Re = D_h²·A/(2·I) (Darcy = 4 times this).
    pub fanning_f_re: f64,
    /// Exact u_max/ū.
    pub max_to_mean_velocity: f64,
    /// Where the solution comes from.
    pub source: &'static str,
}

impl ExactCase {
    /// Hydraulic diameter D_h = 4A/P, m.
    pub fn hydraulic_diameter(&self) -> f64 {
        4.0 * self.area / self.perimeter
    }

    /// The exact ũ at `p` (global coordinates, metres), 0 outside the fluid. `None` when the
    /// shape is not one of the forms with a known solution (circle, ellipse, equilateral
    /// triangle, sharp rectangle, concentric annulus) — which cannot happen for the cases of
    /// [`cases`] unless their `shape` was edited.
    pub fn velocity(&self, p: Point) -> Option<f64> {
        let field = Field::from_shape(&self.shape)?;
        if !self.shape.contains(p) {
            return Some(0.0);
        }
        Some(field.value(p).max(0.0))
    }

    /// The exact local wall shear of the unit problem, τ̃ = |∇ũ|, at the wall point `p`
    /// (global coordinates). Off the wall it returns |∇ũ| of the exact field's analytic
    /// continuation (for the rectangle, the series at the nearest point of the closed
    /// rectangle). `None` as for [`ExactCase::velocity`].
    pub fn wall_shear(&self, p: Point) -> Option<f64> {
        let field = Field::from_shape(&self.shape)?;
        let g = field.gradient(p);
        Some(g[0].hypot(g[1]))
    }
}

/// Builds a case from its exact ingredients; f·Re and u_max/ū follow from them.
#[allow(clippy::too_many_arguments)]
fn make_case(
    key: &'static str,
    title: String,
    shape: Shape,
    area: f64,
    perimeter: f64,
    flow_integral: f64,
    u_max: f64,
    source: &'static str,
) -> ExactCase {
    let d_h = 4.0 * area / perimeter;
    ExactCase {
        key,
        title,
        shape,
        area,
        perimeter,
        flow_integral,
        fanning_f_re: d_h * d_h * area / (2.0 * flow_integral),
        max_to_mean_velocity: u_max * area / flow_integral,
        source,
    }
}

fn single(p: Primitive, name: &str) -> Shape {
    Shape {
        name: Some(name.to_string()),
        regions: vec![p],
        holes: vec![],
    }
}

/// The six verification cases, in this order: circle, ellipse b/a = 0.5, equilateral triangle,
/// square, rectangle b/a = 0.25, concentric annulus r_i/r_o = 0.5. Each is of size about one
/// metre and shifted off the origin by (0.013, −0.027)·size.
pub fn cases() -> Vec<ExactCase> {
    let mut out = Vec::with_capacity(6);

    // Circle, d = 1.
    let r = 0.5;
    out.push(make_case(
        "circle",
        "circle d = 1".to_string(),
        single(
            Primitive::Circle {
                center: SHIFT,
                radius: r,
            },
            "circle",
        ),
        PI * r * r,
        2.0 * PI * r,
        PI * r.powi(4) / 8.0,
        r * r / 4.0,
        "Hagen–Poiseuille, exact: u = (R² − r²)/4",
    ));

    // Ellipse 2a = 1, b/a = 0.5.
    let (a, b) = (0.5, 0.25);
    let s2 = a * a + b * b;
    out.push(make_case(
        "ellipse",
        "ellipse 1 × 0.5 (b/a = 0.5)".to_string(),
        single(
            Primitive::Ellipse {
                center: SHIFT,
                semi_axes: [a, b],
                angle: 0.0,
            },
            "ellipse",
        ),
        PI * a * b,
        ellipse_perimeter(a, b),
        PI * (a * b).powi(3) / (4.0 * s2),
        a * a * b * b / (2.0 * s2),
        "exact quadratic solution, classical (Shah & London 1978, elliptical ducts)",
    ));

    // Equilateral triangle of side 1, horizontal base, centroid at SHIFT.
    let s = 1.0;
    let rc = s / 3f64.sqrt();
    let points: Vec<Point> = [90.0f64, 210.0, 330.0]
        .iter()
        .map(|deg| {
            let t = deg.to_radians();
            [SHIFT[0] + rc * t.cos(), SHIFT[1] + rc * t.sin()]
        })
        .collect();
    let height = 0.5 * 3f64.sqrt() * s;
    out.push(make_case(
        "triangle",
        "equilateral triangle s = 1".to_string(),
        single(Primitive::Polygon { points }, "equilateral triangle"),
        0.25 * 3f64.sqrt() * s * s,
        3.0 * s,
        3f64.sqrt() * s.powi(4) / 320.0,
        height * height / 27.0,
        "exact cubic solution u = d1·d2·d3/H, classical (Shah & London 1978, triangular ducts)",
    ));

    // Square 1 × 1 and rectangle 1 × 0.25.
    for (key, title, w, h) in [
        ("square", "square 1 × 1", 1.0, 1.0),
        ("rectangle", "rectangle 1 × 0.25 (b/a = 0.25)", 1.0, 0.25),
    ] {
        out.push(make_case(
            key,
            title.to_string(),
            single(
                Primitive::Rect {
                    center: [SHIFT[0] * w, SHIFT[1] * w],
                    size: [w, h],
                    corner_radius: 0.0,
                    angle: 0.0,
                },
                key,
            ),
            w * h,
            2.0 * (w + h),
            rectangle_flow_integral(w, h),
            rectangle_velocity(w, h, 0.5 * w, 0.5 * h),
            "exact Fourier series, classical (Shah & London 1978, rectangular ducts)",
        ));
    }

    // Concentric annulus d_o = 1, r_i/r_o = 0.5.
    let (ro, ri): (f64, f64) = (0.5, 0.25);
    let d2 = ro * ro - ri * ri;
    let l = (ro / ri).ln();
    let rm2 = d2 / (2.0 * l);
    out.push(make_case(
        "annulus",
        "concentric annulus d_o = 1, r_i/r_o = 0.5".to_string(),
        Shape {
            name: Some("concentric annulus".to_string()),
            regions: vec![Primitive::Circle {
                center: SHIFT,
                radius: ro,
            }],
            holes: vec![Primitive::Circle {
                center: SHIFT,
                radius: ri,
            }],
        },
        PI * d2,
        2.0 * PI * (ro + ri),
        PI / 8.0 * d2 * (ro * ro + ri * ri - d2 / l),
        0.25 * (ro * ro - rm2 + rm2 * (rm2 / (ro * ro)).ln()),
        "exact logarithmic solution, classical (Shah & London 1978, concentric annular ducts)",
    ));
    out
}

// ---------------------------------------------------------------------------------------------
// Rectangle
// ---------------------------------------------------------------------------------------------

/// I = ∫ũ dA of the unit problem on a w × h rectangle (full side lengths, any order), m⁴.
///
/// With s = min(w, h), l = max(w, h): I = l s³/12 − (16 s⁴/π⁵)·Σ_{n odd} tanh(nπl/(2s))/n⁵,
/// the sum evaluated as (31/32)ζ(5) − Σ_{n odd} (1 − tanh(nπl/(2s)))/n⁵ (exponentially
/// convergent), so the result is exact to round-off. NaN unless both sides are positive and
/// finite.
pub fn rectangle_flow_integral(w: f64, h: f64) -> f64 {
    if !(w.is_finite() && h.is_finite() && w > 0.0 && h > 0.0) {
        return f64::NAN;
    }
    let (l, s) = if w >= h { (w, h) } else { (h, w) };
    let mut correction = 0.0;
    let mut n = 1usize;
    loop {
        let nf = n as f64;
        let e = (-nf * PI * l / s).exp(); // e^{−2z}, z = nπl/(2s)
        let term = 2.0 * e / (1.0 + e) / nf.powi(5);
        correction += term;
        if term < 1e-20 || n > 2001 {
            break;
        }
        n += 2;
    }
    let sum = 31.0 / 32.0 * ZETA5 - correction;
    l * s.powi(3) / 12.0 - 16.0 * s.powi(4) / PI.powi(5) * sum
}

/// ũ at (x, y) of the unit problem on [0, w] × [0, h] (x, y measured from a corner), by the
/// Fourier series of the module documentation. Of the two equivalent series the one whose
/// terms decay faster at (x, y) is summed (geometric decay away from the walls). 0 outside the
/// rectangle; NaN for sizes that are not positive and finite.
pub fn rectangle_velocity(w: f64, h: f64, x: f64, y: f64) -> f64 {
    if !(w.is_finite() && h.is_finite() && w > 0.0 && h > 0.0) {
        return f64::NAN;
    }
    if !(x > 0.0 && x < w && y > 0.0 && y < h) {
        return 0.0;
    }
    rect_series(w, h, x, y).0
}

/// (ũ, ∂ũ/∂x, ∂ũ/∂y) on [0, w] × [0, h] by whichever series converges faster at (x, y); the
/// point is clamped into the closed rectangle.
fn rect_series(w: f64, h: f64, x: f64, y: f64) -> (f64, f64, f64) {
    let x = x.clamp(0.0, w);
    let y = y.clamp(0.0, h);
    let dx = x.min(w - x);
    let dy = y.min(h - y);
    if dx <= 0.0 && dy <= 0.0 {
        return (0.0, 0.0, 0.0); // a corner: ũ = 0 and ∇ũ = 0
    }
    if dx / h >= dy / w {
        rect_series_a(w, h, x, y)
    } else {
        let (u, uy, ux) = rect_series_a(h, w, y, x);
        (u, ux, uy)
    }
}

/// The series with the parabola across h: returns (ũ, ∂ũ/∂x, ∂ũ/∂y).
///
/// ũ = y(h − y)/2 − Σ_{n odd} cₙ sin(kₙy)·C(x),  cₙ = 4h²/(π³n³),  kₙ = nπ/h,
/// C = cosh(kₙ(x − w/2))/cosh(kₙw/2), S = sinh(kₙ(x − w/2))/cosh(kₙw/2), evaluated as ratios of
/// decaying exponentials (no overflow). Terms decay like e^{−kₙ·d}, d = min(x, w − x); the sum
/// stops when the geometric tail bound of the gradient terms is below 1e-17·h.
fn rect_series_a(w: f64, h: f64, x: f64, y: f64) -> (f64, f64, f64) {
    let big_x = x - 0.5 * w;
    let half = 0.5 * w;
    let dist = half - big_x.abs();
    let sign = if big_x < 0.0 { -1.0 } else { 1.0 };
    let q = (-2.0 * PI * dist / h).exp(); // ratio of successive bounds' exponentials
    let stop = 1e-17 * h * (1.0 - q);
    let mut u = 0.5 * y * (h - y);
    let mut ux = 0.0;
    let mut uy = 0.5 * (h - 2.0 * y);
    let mut n = 1usize;
    while n <= RECT_MAX_N {
        let nf = n as f64;
        let k = nf * PI / h;
        let c = 4.0 * h * h / (PI.powi(3) * nf.powi(3));
        let e1 = (-k * dist).exp();
        let e2 = (-k * (big_x.abs() + half)).exp();
        let den = 1.0 + (-2.0 * k * half).exp();
        let cc = (e1 + e2) / den;
        let ss = sign * (e1 - e2) / den;
        let (sn, cs) = (k * y).sin_cos();
        u -= c * sn * cc;
        ux -= c * k * sn * ss;
        uy -= c * k * cs * cc;
        if 2.0 * c * k * e1 < stop {
            break;
        }
        n += 2;
    }
    (u, ux, uy)
}

/// Exact Fanning f·Re of a rectangular duct of side ratio `aspect` (either b/a or a/b; the
/// result is symmetric), from [`rectangle_flow_integral`]. NaN unless 0 < aspect < ∞.
pub fn rectangle_f_re(aspect: f64) -> f64 {
    if !(aspect.is_finite() && aspect > 0.0) {
        return f64::NAN;
    }
    let (w, h) = (1.0, aspect);
    let area = w * h;
    let d_h = 2.0 * w * h / (w + h);
    d_h * d_h * area / (2.0 * rectangle_flow_integral(w, h))
}

// ---------------------------------------------------------------------------------------------
// Annulus
// ---------------------------------------------------------------------------------------------

/// Exact Fanning f·Re of a concentric annulus of radius ratio κ = r_i/r_o, 0 ≤ κ ≤ 1:
///
/// f·Re = 16(1 − κ)² / (1 + κ² − (1 − κ²)/ln(1/κ)).
///
/// The denominator cancels to D = (2/3)ε² + ε⁴/90 + ε⁵/90 + 37ε⁶/3780 + 8ε⁷/945 +
/// 119ε⁸/16200 + … as ε = 1 − κ → 0 (Taylor expansion, computed symbolically), which is used for
/// ε < 0.02 to avoid the cancellation; the end points give the limits 16 (κ = 0, circle) and
/// 24 (κ = 1, parallel plates). NaN outside [0, 1].
pub fn annulus_f_re(ratio: f64) -> f64 {
    if !(0.0..=1.0).contains(&ratio) {
        return f64::NAN;
    }
    let e = 1.0 - ratio;
    if e < 0.02 {
        let d_over_e2 = 2.0 / 3.0
            + e * e
                * (1.0 / 90.0
                    + e * (1.0 / 90.0
                        + e * (37.0 / 3780.0 + e * (8.0 / 945.0 + e * (119.0 / 16200.0)))));
        return 16.0 / d_over_e2;
    }
    let l = -ratio.ln(); // +∞ at κ = 0, giving the circle
    let den = 1.0 + ratio * ratio - (1.0 - ratio * ratio) / l;
    16.0 * e * e / den
}

// ---------------------------------------------------------------------------------------------
// Ellipse
// ---------------------------------------------------------------------------------------------

/// Exact perimeter of an ellipse with semi-axes a, b (metres): P = ∫₀^{2π} √(a² sin²θ +
/// b² cos²θ) dθ by the periodic trapezoidal rule, whose error decays geometrically with the
/// number of points (roughly like ((a − b)/(a + b))^N); the number of points is doubled until
/// two successive values agree to 1e-15 relative. NaN unless both are positive and finite.
pub fn ellipse_perimeter(a: f64, b: f64) -> f64 {
    if !(a.is_finite() && b.is_finite() && a > 0.0 && b > 0.0) {
        return f64::NAN;
    }
    let trap = |n: usize| -> f64 {
        let dt = 2.0 * PI / n as f64;
        (0..n)
            .map(|j| {
                let (s, c) = (j as f64 * dt).sin_cos();
                (a * a * s * s + b * b * c * c).sqrt()
            })
            .sum::<f64>()
            * dt
    };
    let mut n = 16;
    let mut prev = trap(n);
    loop {
        n *= 2;
        let next = trap(n);
        if (next - prev).abs() <= 1e-15 * next || n >= 1 << 24 {
            return next;
        }
        prev = next;
    }
}

/// Exact local wall shear τ̃ = |∇ũ| of the unit problem in an ellipse with semi-axes a, b, at
/// the point `p_local` given in the ellipse's own frame (centre at the origin, first axis
/// along x): |∇ũ| = a²b²/(a²+b²)·√(x²/a⁴ + y²/b⁴). Meaningful on the wall; elsewhere it is the
/// gradient magnitude of the exact field.
pub fn ellipse_wall_shear(a: f64, b: f64, p_local: [f64; 2]) -> f64 {
    let [x, y] = p_local;
    a * a * b * b / (a * a + b * b) * (x * x / a.powi(4) + y * y / b.powi(4)).sqrt()
}

/// Exact Fanning f·Re of an elliptical duct of axis ratio b/a (symmetric in the ratio):
/// f·Re = 32π²(a² + b²)/P², P from [`ellipse_perimeter`]. NaN unless 0 < ratio < ∞.
pub fn ellipse_f_re(ratio: f64) -> f64 {
    if !(ratio.is_finite() && ratio > 0.0) {
        return f64::NAN;
    }
    let (a, b) = (1.0, ratio);
    let p = ellipse_perimeter(a, b);
    32.0 * PI * PI * (a * a + b * b) / (p * p)
}

/// (max/mean, min/mean) of the exact wall shear around an ellipse of axis ratio b/a, the mean
/// being A/P. With a ≥ b the maximum a²b/(a²+b²) is at the ends of the minor axis and the minimum
/// ab²/(a²+b²) at the ends of the major axis, so max/mean = aP/(π(a²+b²)) and
/// min/mean = bP/(π(a²+b²)). NaN unless 0 < ratio < ∞.
pub fn ellipse_wall_shear_extremes_over_mean(ratio: f64) -> (f64, f64) {
    if !(ratio.is_finite() && ratio > 0.0) {
        return (f64::NAN, f64::NAN);
    }
    let (a, b) = if ratio <= 1.0 {
        (1.0, ratio)
    } else {
        (ratio, 1.0)
    };
    let p = ellipse_perimeter(a, b);
    let den = PI * (a * a + b * b);
    (a * p / den, b * p / den)
}

// ---------------------------------------------------------------------------------------------
// Fields recognised from a shape
// ---------------------------------------------------------------------------------------------

fn rotate(p: Point, angle: f64) -> Point {
    let (s, c) = angle.sin_cos();
    [c * p[0] - s * p[1], s * p[0] + c * p[1]]
}

/// An exact field, decoded from the primitives of a shape.
#[derive(Debug, Clone, Copy)]
enum Field {
    Circle {
        center: Point,
        radius: f64,
    },
    Ellipse {
        center: Point,
        a: f64,
        b: f64,
        angle: f64,
    },
    /// Inward unit normals nᵢ and offsets cᵢ with dᵢ(p) = nᵢ·p + cᵢ; height H.
    Triangle {
        normals: [Point; 3],
        offsets: [f64; 3],
        height: f64,
    },
    Rect {
        center: Point,
        w: f64,
        h: f64,
        angle: f64,
    },
    Annulus {
        center: Point,
        r_i: f64,
        r_o: f64,
    },
}

impl Field {
    fn from_shape(shape: &Shape) -> Option<Field> {
        match (shape.regions.as_slice(), shape.holes.as_slice()) {
            ([Primitive::Circle { center, radius }], []) => Some(Field::Circle {
                center: *center,
                radius: *radius,
            }),
            (
                [Primitive::Circle {
                    center: co,
                    radius: ro,
                }],
                [Primitive::Circle {
                    center: ci,
                    radius: ri,
                }],
            ) if (co[0] - ci[0]).hypot(co[1] - ci[1]) <= 1e-12 * ro && ri < ro && *ri > 0.0 => {
                Some(Field::Annulus {
                    center: *co,
                    r_i: *ri,
                    r_o: *ro,
                })
            }
            (
                [Primitive::Ellipse {
                    center,
                    semi_axes,
                    angle,
                }],
                [],
            ) => Some(Field::Ellipse {
                center: *center,
                a: semi_axes[0],
                b: semi_axes[1],
                angle: *angle,
            }),
            (
                [Primitive::Rect {
                    center,
                    size,
                    corner_radius,
                    angle,
                }],
                [],
            ) if *corner_radius == 0.0 => Some(Field::Rect {
                center: *center,
                w: size[0],
                h: size[1],
                angle: *angle,
            }),
            ([Primitive::Polygon { points }], []) if points.len() == 3 => Self::equilateral(points),
            _ => None,
        }
    }

    fn equilateral(points: &[Point]) -> Option<Field> {
        let side = |i: usize| {
            let (p, q) = (points[i], points[(i + 1) % 3]);
            (q[0] - p[0]).hypot(q[1] - p[1])
        };
        let s = (side(0) + side(1) + side(2)) / 3.0;
        if s.is_nan() || s <= 0.0 || (0..3).any(|i| (side(i) - s).abs() > 1e-9 * s) {
            return None;
        }
        let (p0, p1, p2) = (points[0], points[1], points[2]);
        let orient =
            ((p1[0] - p0[0]) * (p2[1] - p0[1]) - (p1[1] - p0[1]) * (p2[0] - p0[0])).signum();
        let mut normals = [[0.0; 2]; 3];
        let mut offsets = [0.0; 3];
        for i in 0..3 {
            let (p, q) = (points[i], points[(i + 1) % 3]);
            let len = side(i);
            // Left normal of a counter-clockwise edge points inward.
            let n = [-orient * (q[1] - p[1]) / len, orient * (q[0] - p[0]) / len];
            normals[i] = n;
            offsets[i] = -(n[0] * p[0] + n[1] * p[1]);
        }
        Some(Field::Triangle {
            normals,
            offsets,
            height: 0.5 * 3f64.sqrt() * s,
        })
    }

    /// ũ of the exact formula (its continuation outside the fluid is not clipped).
    fn value(&self, p: Point) -> f64 {
        match *self {
            Field::Circle { center, radius } => {
                let r2 = (p[0] - center[0]).powi(2) + (p[1] - center[1]).powi(2);
                0.25 * (radius * radius - r2)
            }
            Field::Ellipse {
                center,
                a,
                b,
                angle,
            } => {
                let l = rotate([p[0] - center[0], p[1] - center[1]], -angle);
                a * a * b * b / (2.0 * (a * a + b * b))
                    * (1.0 - l[0] * l[0] / (a * a) - l[1] * l[1] / (b * b))
            }
            Field::Triangle {
                normals,
                offsets,
                height,
            } => {
                let d = |i: usize| normals[i][0] * p[0] + normals[i][1] * p[1] + offsets[i];
                d(0) * d(1) * d(2) / height
            }
            Field::Rect {
                center,
                w,
                h,
                angle,
            } => {
                let l = rotate([p[0] - center[0], p[1] - center[1]], -angle);
                rectangle_velocity(w, h, l[0] + 0.5 * w, l[1] + 0.5 * h)
            }
            Field::Annulus { center, r_i, r_o } => {
                let r = (p[0] - center[0]).hypot(p[1] - center[1]);
                let d2 = r_o * r_o - r_i * r_i;
                0.25 * (r_o * r_o - r * r) + d2 * (r / r_o).ln() / (4.0 * (r_o / r_i).ln())
            }
        }
    }

    /// ∇ũ of the exact formula.
    fn gradient(&self, p: Point) -> Point {
        match *self {
            Field::Circle { center, .. } => [-0.5 * (p[0] - center[0]), -0.5 * (p[1] - center[1])],
            Field::Ellipse {
                center,
                a,
                b,
                angle,
            } => {
                let l = rotate([p[0] - center[0], p[1] - center[1]], -angle);
                let c = -a * a * b * b / (a * a + b * b);
                rotate([c * l[0] / (a * a), c * l[1] / (b * b)], angle)
            }
            Field::Triangle {
                normals,
                offsets,
                height,
            } => {
                let d: Vec<f64> = (0..3)
                    .map(|i| normals[i][0] * p[0] + normals[i][1] * p[1] + offsets[i])
                    .collect();
                let mut g = [0.0; 2];
                for i in 0..3 {
                    let prod = d[(i + 1) % 3] * d[(i + 2) % 3] / height;
                    g[0] += normals[i][0] * prod;
                    g[1] += normals[i][1] * prod;
                }
                g
            }
            Field::Rect {
                center,
                w,
                h,
                angle,
            } => {
                let l = rotate([p[0] - center[0], p[1] - center[1]], -angle);
                let (_, ux, uy) = rect_series(w, h, l[0] + 0.5 * w, l[1] + 0.5 * h);
                rotate([ux, uy], angle)
            }
            Field::Annulus { center, r_i, r_o } => {
                let v = [p[0] - center[0], p[1] - center[1]];
                let r2 = v[0] * v[0] + v[1] * v[1];
                // dũ/dr / r = −1/2 + r_m²/(2r²), r_m² = (r_o² − r_i²)/(2 ln(r_o/r_i)).
                let rm2 = (r_o * r_o - r_i * r_i) / (2.0 * (r_o / r_i).ln());
                let f = -0.5 + 0.5 * rm2 / r2;
                [f * v[0], f * v[1]]
            }
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Exact solutions of the generalised problem c·u − ∇·(k∇u) = f (the problem layer's checks).

/// The modified Bessel function I₀(x) = Σ_m (x²/4)^m/(m!)², summed until the terms stop
/// changing the sum (all terms are positive, so there is no cancellation; finite up to x ≈ 700).
/// Abramowitz & Stegun 1964, 9.6.10.
pub fn bessel_i0(x: f64) -> f64 {
    let q = 0.25 * x * x;
    let (mut term, mut sum) = (1.0, 1.0);
    for m in 1..2000 {
        term *= q / (m as f64 * m as f64);
        sum += term;
        if term < 1e-17 * sum {
            break;
        }
    }
    sum
}

/// The modified Bessel function I₁(x) = (x/2)·Σ_m (x²/4)^m/(m!·(m + 1)!) (Abramowitz & Stegun
/// 1964, 9.6.10).
pub fn bessel_i1(x: f64) -> f64 {
    let q = 0.25 * x * x;
    let (mut term, mut sum) = (1.0, 1.0);
    for m in 1..2000 {
        term *= q / (m as f64 * (m + 1) as f64);
        sum += term;
        if term < 1e-17 * sum {
            break;
        }
    }
    0.5 * x * sum
}

/// The shifted problem on a disc: c·u − ∇²u = 1 for r < R, u = 0 at r = R, c > 0. Radial,
/// u″ + u′/r − c·u = −1, whose bounded solution is u = (1 − I₀(√c·r)/I₀(√c·R))/c (the
/// modified Bessel equation; exact). Returns u at radius r.
pub fn shifted_disc(c: f64, radius: f64, r: f64) -> f64 {
    let s = c.sqrt();
    (1.0 - bessel_i0(s * r) / bessel_i0(s * radius)) / c
}

/// ∫u dA of [`shifted_disc`]: (πR²/c)·(1 − 2·I₁(√c·R)/(√c·R·I₀(√c·R))) (from
/// ∫₀^R I₀(a·r)·r dr = R·I₁(a·R)/a; exact).
pub fn shifted_disc_integral(c: f64, radius: f64) -> f64 {
    let a = c.sqrt() * radius;
    std::f64::consts::PI * radius * radius / c * (1.0 - 2.0 * bessel_i1(a) / (a * bessel_i0(a)))
}

/// Poiseuille flow with Navier slip on a disc: −∇²u = 1 for r < R, u = b·∂u/∂n_in at r = R
/// (slip length b): u = (R² − r² + 2bR)/4, whose flow rate is (1 + 4b/R) times the no-slip
/// one, πR⁴/8 (exact; e.g. Lauga, Brenner & Stone 2007, from memory).
pub fn slip_disc(b: f64, radius: f64, r: f64) -> f64 {
    (radius * radius - r * r + 2.0 * b * radius) / 4.0
}

/// A layered slab: −(k·u′)′ = 1 for 0 < y < H, u(0) = u(H) = 0, with k = k₁ for y < H/2 and
/// k₂ above. The flux k·u′ = F − y is continuous; below, u = (F·y − y²/2)/k₁; above,
/// u = (F·y − y²/2 − C)/k₂ with C = F·H − H²/2 from u(H) = 0; continuity of u at H/2 fixes F
/// (one linear equation). Exact; any quantity independent of x, so it holds in a channel whose
/// side walls carry no flux.
pub fn layered_slab(k1: f64, k2: f64, height: f64, y: f64) -> f64 {
    let m = 0.5 * height;
    // Below: u = (F·y − y²/2)/k₁. Above: u = (F·y − y²/2 − C)/k₂ with the same flux k·u′ = F − y
    // (continuous) and C fixed by u(H) = 0; value continuity at m then fixes F:
    // (F·m − m²/2)/k₁ = (F·m − m²/2 − C)/k₂, C = F·H − H²/2.
    let c_of = |f: f64| f * height - 0.5 * height * height;
    // Linear in F: (F·m − m²/2)(1/k₁ − 1/k₂) + C(F)/k₂ = 0.
    let a = m * (1.0 / k1 - 1.0 / k2) + height / k2;
    let b = -0.5 * m * m * (1.0 / k1 - 1.0 / k2) - 0.5 * height * height / k2;
    let f = -b / a;
    if y <= m {
        (f * y - 0.5 * y * y) / k1
    } else {
        (f * y - 0.5 * y * y - c_of(f)) / k2
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rel(a: f64, b: f64) -> f64 {
        (a - b).abs() / b.abs()
    }

    fn case(key: &str) -> ExactCase {
        cases().into_iter().find(|c| c.key == key).unwrap()
    }

    #[test]
    fn six_cases_in_order_off_the_origin() {
        let keys: Vec<&str> = cases().iter().map(|c| c.key).collect();
        assert_eq!(
            keys,
            [
                "circle",
                "ellipse",
                "triangle",
                "square",
                "rectangle",
                "annulus"
            ]
        );
        for c in cases() {
            let (lo, hi) = c.shape.bbox();
            let mid = [0.5 * (lo[0] + hi[0]), 0.5 * (lo[1] + hi[1])];
            assert!(mid[0].abs() > 1e-3 && mid[1].abs() > 1e-3, "{}", c.key);
            assert!(c.shape.validate().is_ok(), "{}", c.key);
            assert!(Field::from_shape(&c.shape).is_some(), "{}", c.key);
        }
        // D_h of a circle is its diameter, of a square its side, of a concentric annulus the
        // gap doubled, d_o − d_i (exact geometry, common practice, no source).
        for (key, d_h) in [("circle", 1.0), ("square", 1.0), ("annulus", 1.0 - 0.5)] {
            let c = case(key);
            assert!(rel(c.hydraulic_diameter(), d_h) < 1e-15, "{key}");
        }
    }

    #[test]
    fn circle_published() {
        // Hagen–Poiseuille, exact: f·Re = 16, u_max/ū = 2.
        let c = case("circle");
        assert!((c.fanning_f_re - 16.0).abs() < 1e-12);
        assert!((c.max_to_mean_velocity - 2.0).abs() < 1e-12);
    }

    #[test]
    fn ellipse_published() {
        // Shah & London 1978, elliptical ducts: f·Re = 16.823 at b/a = 0.5 (from memory);
        // u_max/ū = 2 exactly (quadratic profile).
        let c = case("ellipse");
        assert!(
            (c.fanning_f_re - 16.8233).abs() < 1e-4,
            "{}",
            c.fanning_f_re
        );
        assert!((c.max_to_mean_velocity - 2.0).abs() < 1e-12);
        assert!((ellipse_f_re(0.5) - c.fanning_f_re).abs() < 1e-12);
        assert!((ellipse_f_re(2.0) - c.fanning_f_re).abs() < 1e-12);
        // The circle limit of the closed form (exact): 16.
        assert!((ellipse_f_re(1.0) - 16.0).abs() < 1e-12);
        // Wall shear extremes at b/a = 0.5 (exact closed form; values from the brief).
        let (mx, mn) = ellipse_wall_shear_extremes_over_mean(0.5);
        assert!((mx - 1.2336).abs() < 1e-4, "{mx}");
        assert!((mn - 0.6168).abs() < 1e-4, "{mn}");
    }

    #[test]
    fn ellipse_perimeter_against_gauss_kummer_series() {
        // Gauss–Kummer series P = π(a+b)·Σ C(1/2, n)² hⁿ, h = ((a−b)/(a+b))², exact (common
        // practice, no source); converges fast for moderate eccentricity.
        for &(a, b) in &[(1.0f64, 0.5f64), (0.5, 0.25), (3.0, 1.0), (1.0, 1.0)] {
            let hh: f64 = ((a - b) / (a + b)).powi(2);
            let mut binom = 1.0;
            let mut sum = 1.0;
            for n in 1..200 {
                binom *= (0.5 - (n as f64 - 1.0)) / n as f64;
                sum += binom * binom * hh.powi(n);
            }
            let p = PI * (a + b) * sum;
            assert!(rel(ellipse_perimeter(a, b), p) < 1e-14, "{a} {b}");
        }
    }

    #[test]
    fn ellipse_shear_distribution() {
        // Exact: extremes at the axis ends; the perimeter mean equals A/P (force balance).
        let c = case("ellipse");
        let walls = c.shape.walls(1e-3);
        let (mut mx, mut mn, mut sum) = (0.0f64, f64::INFINITY, 0.0);
        for s in &walls.samples {
            let local = [s.point[0] - SHIFT[0], s.point[1] - SHIFT[1]];
            let t = ellipse_wall_shear(0.5, 0.25, local);
            let t2 = c.wall_shear(s.point).unwrap();
            assert!((t - t2).abs() < 1e-14);
            mx = mx.max(t);
            mn = mn.min(t);
            sum += t * s.ds;
        }
        let mean = sum / walls.perimeter;
        assert!(rel(mean, c.area / c.perimeter) < 1e-7, "{mean}");
        let (emx, emn) = ellipse_wall_shear_extremes_over_mean(0.5);
        let mean_exact = c.area / c.perimeter;
        assert!(rel(mx / mean_exact, emx) < 1e-5);
        assert!(rel(mn / mean_exact, emn) < 1e-5);
    }

    #[test]
    fn triangle_published() {
        // Exact cubic solution (Shah & London 1978, equilateral triangle, from memory):
        // f·Re = 40/3, u_max/ū = 20/9.
        let c = case("triangle");
        assert!((c.fanning_f_re - 40.0 / 3.0).abs() < 1e-12);
        assert!((c.max_to_mean_velocity - 20.0 / 9.0).abs() < 1e-12);
        // The maximum of the field is at the centroid: no sample of a fine grid exceeds it.
        let field = Field::from_shape(&c.shape).unwrap();
        let umax = field.value(SHIFT);
        let (lo, hi) = c.shape.bbox();
        let n = 400;
        for i in 0..n {
            for j in 0..n {
                let p = [
                    lo[0] + (i as f64 + 0.5) / n as f64 * (hi[0] - lo[0]),
                    lo[1] + (j as f64 + 0.5) / n as f64 * (hi[1] - lo[1]),
                ];
                if c.shape.contains(p) {
                    assert!(field.value(p) <= umax * (1.0 + 1e-12));
                }
            }
        }
        // ũ_max = H²/27 at the centroid, H = √3/2 the height of the unit triangle (the exact
        // cubic solution; derivation in the module notes).
        let height = 0.5 * 3f64.sqrt();
        assert!(rel(umax, height * height / 27.0) < 1e-12, "{umax}");
    }

    #[test]
    fn rectangle_published() {
        // Shah & London 1978, rectangular ducts table (from memory): f·Re = 14.2271 (square),
        // 18.233 (b/a = 0.25), 15.548 (0.5), 20.585 (0.125); u_max/ū = 2.0962 (square).
        let sq = case("square");
        assert!(
            (sq.fanning_f_re - 14.2271).abs() < 1e-4,
            "{}",
            sq.fanning_f_re
        );
        assert!(
            (sq.max_to_mean_velocity - 2.0962).abs() < 1e-4,
            "{}",
            sq.max_to_mean_velocity
        );
        let r = case("rectangle");
        assert!((r.fanning_f_re - 18.233).abs() < 1e-3, "{}", r.fanning_f_re);
        assert!((rectangle_f_re(0.25) - r.fanning_f_re).abs() < 1e-12);
        assert!((rectangle_f_re(4.0) - r.fanning_f_re).abs() < 1e-12);
        assert!((rectangle_f_re(0.5) - 15.548).abs() < 1e-3);
        assert!((rectangle_f_re(0.125) - 20.585).abs() < 1e-3);
        // Parallel plates limit, exact: 24.
        assert!((rectangle_f_re(1e-6) - 24.0).abs() < 1e-3);
    }

    #[test]
    fn zeta5_constant() {
        // Direct sum of 1/n⁵ with the Euler–Maclaurin tail 1/(4N⁴) + 1/(2N⁵) + 5/(12N⁶)
        // (common practice, no source).
        let big_n = 2000usize;
        let mut s = 0.0;
        for n in (1..big_n).rev() {
            s += 1.0 / (n as f64).powi(5);
        }
        let nf = big_n as f64;
        s += 1.0 / (4.0 * nf.powi(4)) + 1.0 / (2.0 * nf.powi(5)) + 5.0 / (12.0 * nf.powi(6));
        assert!(rel(s, ZETA5) < 1e-15, "{s}");
    }

    #[test]
    fn rectangle_integral_against_double_series() {
        // Double Fourier series of the unit problem (exact; common practice, no source):
        // I = Σ_{m,n odd} 64 w h / (π⁶ m² n² (m²/w² + n²/h²)); truncation error ~ M⁻³.
        for &(w, h) in &[(1.0, 1.0), (1.0, 0.25), (0.3, 0.7)] {
            let m_max = 4001usize;
            let mut s = 0.0;
            for m in (1..=m_max).step_by(2) {
                let mf = m as f64;
                for n in (1..=m_max).step_by(2) {
                    let nf = n as f64;
                    s += 1.0 / (mf * mf * nf * nf * (mf * mf / (w * w) + nf * nf / (h * h)));
                }
            }
            let i_double = 64.0 * w * h / PI.powi(6) * s;
            let i = rectangle_flow_integral(w, h);
            assert!(rel(i_double, i) < 1e-9, "{w} {h}: {i_double} vs {i}");
            // The brief's normalised form (w h³/12)(1 − (192 h/(π⁵ w)) Σ tanh/n⁵), h ≤ w,
            // by direct summation of the tanh series.
            let (l, sh) = if w >= h { (w, h) } else { (h, w) };
            let mut t = 0.0;
            for n in (1..200_001).step_by(2) {
                let nf = n as f64;
                t += (nf * PI * l / (2.0 * sh)).tanh() / nf.powi(5);
            }
            let i2 = l * sh.powi(3) / 12.0 * (1.0 - 192.0 * sh / (PI.powi(5) * l) * t);
            assert!(rel(i2, i) < 1e-13, "{i2} vs {i}");
        }
    }

    #[test]
    fn annulus_published() {
        // Exact closed form; Shah & London 1978, concentric annular ducts table: 23.8125 at
        // r_i/r_o = 0.5 (from memory).
        let c = case("annulus");
        assert!(
            (c.fanning_f_re - 23.8125).abs() < 1e-4,
            "{}",
            c.fanning_f_re
        );
        assert!((annulus_f_re(0.5) - c.fanning_f_re).abs() < 1e-12);
        // Limits, exact: circle 16, parallel plates 24; the series branch joins the direct one.
        assert_eq!(annulus_f_re(0.0), 16.0);
        assert!((annulus_f_re(1.0) - 24.0).abs() < 1e-12);
        let e: f64 = 0.02;
        let k = 1.0 - e;
        let direct = 16.0 * e * e / (1.0 + k * k - (1.0 - k * k) / (-k.ln()));
        let below = annulus_f_re(1.0 - 0.999_999 * e);
        assert!(rel(direct, below) < 1e-10, "{direct} {below}");
        // 24 − 2ε²/5 − 2ε³/5 − … (Taylor expansion, computed symbolically).
        let e: f64 = 1e-3;
        assert!((annulus_f_re(1.0 - e) - (24.0 - 0.4 * e * e - 0.4 * e.powi(3))).abs() < 1e-11);
        // The maximum of the profile is at r_m² = (r_o² − r_i²)/(2 ln(r_o/r_i)): no radius
        // gives more.
        let field = Field::from_shape(&c.shape).unwrap();
        let umax = c.max_to_mean_velocity * c.flow_integral / c.area;
        for k in 0..=10_000 {
            let r = 0.25 + 0.25 * k as f64 / 10_000.0;
            assert!(field.value([SHIFT[0] + r, SHIFT[1]]) <= umax * (1.0 + 1e-12));
        }
        let rm = (0.1875 / (2.0 * 2f64.ln())).sqrt();
        assert!(rel(field.value([SHIFT[0], SHIFT[1] + rm]), umax) < 1e-14);
    }

    /// Midpoint rule on an n × n grid over the bounding box, restricted to fluid points.
    fn quadrature(c: &ExactCase, n: usize) -> f64 {
        let (lo, hi) = c.shape.bbox();
        let (hx, hy) = ((hi[0] - lo[0]) / n as f64, (hi[1] - lo[1]) / n as f64);
        let mut s = 0.0;
        for i in 0..n {
            for j in 0..n {
                let p = [lo[0] + (i as f64 + 0.5) * hx, lo[1] + (j as f64 + 0.5) * hy];
                s += c.velocity(p).unwrap();
            }
        }
        s * hx * hy
    }

    #[test]
    fn bessel_functions_against_tables() {
        // Abramowitz & Stegun 1964, table 9.8 (from memory): I₀(1), I₁(1), I₀(10)·e⁻¹⁰.
        assert!(rel(bessel_i0(1.0), 1.266_065_877_752_008) < 1e-14);
        assert!(rel(bessel_i1(1.0), 0.565_159_103_992_485) < 1e-14);
        assert!(rel(bessel_i0(10.0) * (-10.0f64).exp(), 0.127_833_337_2) < 1e-9);
        // Large argument: I₀(x) ≈ eˣ/√(2πx)·(1 + 1/(8x) + 9/(128x²)) (A&S 9.7.1).
        let x = 200.0f64;
        let asym =
            x.exp() / (2.0 * PI * x).sqrt() * (1.0 + 1.0 / (8.0 * x) + 9.0 / (128.0 * x * x));
        assert!(rel(bessel_i0(x), asym) < 1e-7);
    }

    #[test]
    fn generalised_solutions_solve_their_equations() {
        // Second differences (step 1e-4, error O(step²)) of the radial and layered solutions.
        let st = 1e-4;
        for (c, r) in [(1.0, 0.3), (1e4, 0.97)] {
            let u = |r: f64| shifted_disc(c, 1.0, r);
            let lap = (u(r + st) - 2.0 * u(r) + u(r - st)) / (st * st)
                + (u(r + st) - u(r - st)) / (2.0 * st * r);
            assert!(
                (c * u(r) - lap - 1.0).abs() < 1e-5,
                "c = {c}: {}",
                c * u(r) - lap
            );
            assert!(u(1.0).abs() < 1e-15);
        }
        // Slip: u(R) = b·(−u′(R)).
        let (b, rr) = (0.1, 2.0);
        let du = (slip_disc(b, rr, rr) - slip_disc(b, rr, rr - st)) / st;
        assert!((slip_disc(b, rr, rr) + b * du).abs() < 1e-4);
        // Layered: −(k u′)′ = 1, continuous u and k·u′ at H/2, zero at both walls.
        let (k1, k2, hh) = (1.0, 5.0, 2.0);
        let u = |y: f64| layered_slab(k1, k2, hh, y);
        assert!(u(0.0).abs() < 1e-15 && u(hh).abs() < 1e-14);
        for (y, k) in [(0.4, k1), (1.6, k2)] {
            let d2 = (u(y + st) - 2.0 * u(y) + u(y - st)) / (st * st);
            assert!((-k * d2 - 1.0).abs() < 1e-5);
        }
        let flux = |y: f64, k: f64| k * (u(y + st) - u(y - st)) / (2.0 * st);
        assert!((flux(1.0 - 2.0 * st, k1) - flux(1.0 + 2.0 * st, k2)).abs() < 1e-3);
        // Disc integral against a midpoint rule in r.
        let (c, n) = (10.0, 20000);
        let num: f64 = (0..n)
            .map(|i| {
                let r = (i as f64 + 0.5) / n as f64;
                2.0 * PI * r * shifted_disc(c, 1.0, r) / n as f64
            })
            .sum();
        assert!(rel(num, shifted_disc_integral(c, 1.0)) < 1e-8);
    }

    #[test]
    fn flow_integrals_against_quadrature() {
        // Self-consistency: the closed-form I against a 2000 × 2000 midpoint rule of the exact
        // field (second order; the field vanishes linearly at the wall).
        for c in cases() {
            let q = quadrature(&c, 2000);
            assert!(
                rel(q, c.flow_integral) < 1e-4,
                "{}: quadrature {q} vs {}",
                c.key,
                c.flow_integral
            );
        }
    }

    #[test]
    fn geometry_matches_walls() {
        // Exact area and perimeter against the crate's exact geometry.
        for c in cases() {
            let w = c.shape.walls(0.01);
            assert!(
                rel(w.area, c.area) < 1e-9,
                "{}: {} vs {}",
                c.key,
                w.area,
                c.area
            );
            assert!(
                rel(w.perimeter, c.perimeter) < 1e-9,
                "{}: {} vs {}",
                c.key,
                w.perimeter,
                c.perimeter
            );
        }
    }

    #[test]
    fn fields_solve_the_unit_problem() {
        // −∇²ũ = 1 inside (five-point Laplacian, step 2e-4, error O(step²)), ũ = 0 on the walls,
        // and the perimeter mean of |∇ũ| on the walls equals A/P (force balance, exact).
        for c in cases() {
            let field = Field::from_shape(&c.shape).unwrap();
            let (lo, hi) = c.shape.bbox();
            let st = 2e-4;
            let mut checked = 0;
            for i in 1..12 {
                for j in 1..12 {
                    let p = [
                        lo[0] + i as f64 / 12.0 * (hi[0] - lo[0]),
                        lo[1] + j as f64 / 12.0 * (hi[1] - lo[1]),
                    ];
                    let inside = |q: Point| c.shape.contains(q);
                    if !(inside(p)
                        && inside([p[0] + st, p[1]])
                        && inside([p[0] - st, p[1]])
                        && inside([p[0], p[1] + st])
                        && inside([p[0], p[1] - st]))
                    {
                        continue;
                    }
                    let lap = (field.value([p[0] + st, p[1]])
                        + field.value([p[0] - st, p[1]])
                        + field.value([p[0], p[1] + st])
                        + field.value([p[0], p[1] - st])
                        - 4.0 * field.value(p))
                        / (st * st);
                    assert!((lap + 1.0).abs() < 1e-6, "{} at {p:?}: {lap}", c.key);
                    // Gradient against central differences.
                    let g = field.gradient(p);
                    let gx = (field.value([p[0] + st, p[1]]) - field.value([p[0] - st, p[1]]))
                        / (2.0 * st);
                    let gy = (field.value([p[0], p[1] + st]) - field.value([p[0], p[1] - st]))
                        / (2.0 * st);
                    assert!(
                        (g[0] - gx).abs() < 1e-6 && (g[1] - gy).abs() < 1e-6,
                        "{}",
                        c.key
                    );
                    checked += 1;
                }
            }
            assert!(checked > 20, "{}", c.key);
            // Midpoint rule on the walls: second order, about 2e-6 at this spacing for the
            // rectangle (largest, from the corners).
            let walls = c.shape.walls(5e-4);
            let mut sum = 0.0;
            for s in &walls.samples {
                let u = field.value(s.point);
                assert!(u.abs() < 1e-9, "{}: ũ = {u} at {:?}", c.key, s.point);
                // The gradient points into the fluid, against the outward normal.
                let g = field.gradient(s.point);
                let tau = c.wall_shear(s.point).unwrap();
                assert!(tau < 1e-12 || -(g[0] * s.normal[0] + g[1] * s.normal[1]) > 0.999 * tau);
                sum += tau * s.ds;
            }
            let mean = sum / walls.perimeter;
            assert!(
                rel(mean, c.area / c.perimeter) < 5e-6,
                "{}: mean shear {mean} vs A/P {}",
                c.key,
                c.area / c.perimeter
            );
        }
    }

    #[test]
    fn bad_arguments_give_nan() {
        assert!(rectangle_flow_integral(-1.0, 1.0).is_nan());
        assert!(rectangle_velocity(1.0, 0.0, 0.5, 0.5).is_nan());
        assert_eq!(rectangle_velocity(1.0, 1.0, 1.5, 0.5), 0.0);
        assert!(rectangle_f_re(0.0).is_nan());
        assert!(annulus_f_re(1.5).is_nan());
        assert!(ellipse_f_re(f64::NAN).is_nan());
        assert!(ellipse_perimeter(0.0, 1.0).is_nan());
        assert!(ellipse_wall_shear_extremes_over_mean(-1.0).0.is_nan());
    }
}
