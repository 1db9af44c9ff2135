//! Exact pixel coverage of a disc, for anti-aliased test masks (used by tests/mask.rs and
//! tests/uncertainty.rs, through `common::coverage`).

use std::f64::consts::PI;

/// ∫ over [−r, x] of √(r² − t²) dt.
pub fn half_disc_integral(x: f64, r: f64) -> f64 {
    let x = x.clamp(-r, r);
    0.5 * (x * (r * r - x * x).max(0.0).sqrt() + r * r * (x / r).asin()) + 0.25 * PI * r * r
}

/// Exact area of the disc of radius r at the origin within {x ≤ X, y ≤ Y} (calculus: the
/// chord lengths integrated in x, split where the chord meets y = Y).
pub fn disc_quadrant(x: f64, y: f64, r: f64) -> f64 {
    if y <= -r || x <= -r {
        return 0.0;
    }
    let big = |a: f64, b: f64| 2.0 * (half_disc_integral(b, r) - half_disc_integral(a, r));
    let part = |a: f64, b: f64| {
        if b <= a {
            0.0
        } else {
            y * (b - a) + half_disc_integral(b, r) - half_disc_integral(a, r)
        }
    };
    let xc = x.min(r);
    if y >= r {
        return big(-r, xc);
    }
    // |t| < xb: the chord reaches past y = Y; |t| > xb: it does not.
    let xb = (r * r - y * y).sqrt();
    let clip = |a: f64, b: f64| (a.max(-r), b.min(xc));
    let mut area = 0.0;
    let (a, b) = clip(-xb, xb);
    area += part(a, b);
    if y > 0.0 {
        for (lo, hi) in [(-r, -xb), (xb, r)] {
            let (a, b) = clip(lo, hi);
            if b > a {
                area += big(a, b);
            }
        }
    }
    area
}

/// Exact area of the rectangle [x0, x1] × [y0, y1] inside the disc of radius r at the origin
/// (inclusion–exclusion of four quadrants).
pub fn disc_rect(x0: f64, x1: f64, y0: f64, y1: f64, r: f64) -> f64 {
    (disc_quadrant(x1, y1, r) - disc_quadrant(x0, y1, r) - disc_quadrant(x1, y0, r)
        + disc_quadrant(x0, y0, r))
    .max(0.0)
}
