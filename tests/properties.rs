//! Properties of a solve that no input may break (issue 19): the figures do not change when the
//! cross-section is moved, turned by a multiple of 90°, mirrored, or its regions and holes are
//! listed in another order; under scaling by k, f·Re and u_max/ū stay, the area scales as k²,
//! D_h as k and the flow integral ∫ũ dA as k⁴. Seeded (proptest's deterministic runner) with a
//! few cases each, so the suite stays fast.

mod common;

use canalis::geometry::{Primitive, Shape};
use common::{rel_err, solve_case};
use proptest::prelude::*;
use proptest::test_runner::{Config, RngAlgorithm, TestRng, TestRunner};

const CELLS: usize = 48;

/// A rectangle w × h (metres) with a circular hole at a fraction (fx, fy) of the way across it,
/// and a second region (a circle overlapping one corner).
fn shape_of(w: f64, h: f64, fx: f64, fy: f64, r: f64) -> Shape {
    let hole_r = r * w.min(h);
    let cx = (-0.5 * w + hole_r) + fx * (w - 2.0 * hole_r);
    let cy = (-0.5 * h + hole_r) + fy * (h - 2.0 * hole_r);
    Shape::new(
        vec![
            Primitive::rect([0.0, 0.0], [w, h]),
            Primitive::Circle {
                center: [0.5 * w, 0.5 * h],
                radius: 0.3 * w.min(h),
            },
        ],
        vec![Primitive::Circle {
            center: [cx, cy],
            radius: 0.6 * hole_r,
        }],
    )
}

fn map(shape: &Shape, f: impl Fn(&Primitive) -> Primitive) -> Shape {
    Shape::new(
        shape.regions.iter().map(&f).collect(),
        shape.holes.iter().map(&f).collect(),
    )
}

/// Mirror image in the y axis.
fn mirrored(p: &Primitive) -> Primitive {
    let m = |q: [f64; 2]| [-q[0], q[1]];
    match p {
        Primitive::Polygon { points } => Primitive::Polygon {
            points: points.iter().map(|&q| m(q)).collect(),
        },
        Primitive::Circle { center, radius } => Primitive::Circle {
            center: m(*center),
            radius: *radius,
        },
        Primitive::Ellipse {
            center,
            semi_axes,
            angle,
        } => Primitive::Ellipse {
            center: m(*center),
            semi_axes: *semi_axes,
            angle: -angle,
        },
        Primitive::Rect {
            center,
            size,
            corner_radius,
            angle,
        } => Primitive::Rect {
            center: m(*center),
            size: *size,
            corner_radius: *corner_radius,
            angle: -angle,
        },
    }
}

/// (f·Re, u_max/ū, area, D_h, flow integral) of a flow-only solve.
fn figures(shape: &Shape) -> [f64; 5] {
    let f = solve_case(shape, CELLS).figures;
    [
        f.fanning_f_re,
        f.max_to_mean_velocity,
        f.area,
        f.hydraulic_diameter,
        f.flow_integral,
    ]
}

fn runner() -> TestRunner {
    TestRunner::new_with_rng(
        Config {
            cases: 6,
            failure_persistence: None,
            ..Config::default()
        },
        TestRng::from_seed(RngAlgorithm::ChaCha, &[19; 32]),
    )
}

fn shapes() -> impl Strategy<Value = Shape> {
    (
        5e-3..2e-2f64,
        5e-3..2e-2f64,
        0.0..1.0f64,
        0.0..1.0f64,
        0.1..0.3f64,
    )
        .prop_map(|(w, h, fx, fy, r)| shape_of(w, h, fx, fy, r))
}

fn close(a: [f64; 5], b: [f64; 5], scale: [f64; 5], tol: f64) -> bool {
    a.iter()
        .zip(b)
        .zip(scale)
        .all(|((x, y), s)| rel_err(y, x * s) <= tol)
}

#[test]
fn issue_19_figures_do_not_change_under_translation_and_quarter_turns() {
    runner()
        .run(
            &(shapes(), -1.0..1.0f64, -1.0..1.0f64, 0..4u8),
            |(shape, dx, dy, quarter)| {
                let base = figures(&shape);
                // The grid covers the bounding box, so it moves and turns with the shape: the
                // same problem but for the placement of the nodes against the box, which round-off
                // and the covering's rounding move by a fraction of a cell (measured: 2e-6 at 48
                // cells, against a discretisation error of about 1e-3 there).
                let angle = quarter as f64 * std::f64::consts::FRAC_PI_2;
                let moved = map(&shape, |p| p.transformed(1.0, angle, [dx, dy]));
                let after = figures(&moved);
                prop_assert!(
                    close(base, after, [1.0; 5], 1e-4),
                    "{base:?} vs {after:?} (turn {quarter}, shift {dx}, {dy})"
                );
                Ok(())
            },
        )
        .unwrap();
}

#[test]
fn issue_19_figures_do_not_change_under_mirroring() {
    runner()
        .run(&shapes(), |shape| {
            let base = figures(&shape);
            let after = figures(&map(&shape, mirrored));
            // As for the turns: the nodes against the mirrored box (measured 3e-6).
            prop_assert!(close(base, after, [1.0; 5], 1e-4), "{base:?} vs {after:?}");
            Ok(())
        })
        .unwrap();
}

#[test]
fn issue_19_figures_scale_as_they_must() {
    runner()
        .run(&(shapes(), 0.01..100.0f64), |(shape, k)| {
            let base = figures(&shape);
            let after = figures(&map(&shape, |p| p.transformed(k, 0.0, [0.0, 0.0])));
            let s = [1.0, 1.0, k * k, k, k.powi(4)];
            prop_assert!(
                close(base, after, s, 1e-6),
                "{base:?} vs {after:?} (k = {k})"
            );
            Ok(())
        })
        .unwrap();
}

#[test]
fn issue_19_the_order_of_regions_and_holes_does_not_matter() {
    runner()
        .run(&(shapes(), 0.0..0.3f64), |(shape, r2)| {
            // Two holes, so that their order matters to the file.
            let mut shape = shape;
            let (lo, hi) = shape.bbox();
            shape.holes.push(Primitive::Circle {
                center: [0.5 * (lo[0] + hi[0]), 0.5 * (lo[1] + hi[1])],
                radius: (0.05 + r2 * 0.1) * (hi[0] - lo[0]).min(hi[1] - lo[1]),
            });
            let base = figures(&shape);
            let mut swapped = shape.clone();
            swapped.regions.reverse();
            swapped.holes.reverse();
            let after = figures(&swapped);
            // The same grid; which primitive names a shared junction, and so the order of the
            // wall samples, changes (measured 1.3e-8).
            prop_assert!(close(base, after, [1.0; 5], 1e-6), "{base:?} vs {after:?}");
            Ok(())
        })
        .unwrap();
}
