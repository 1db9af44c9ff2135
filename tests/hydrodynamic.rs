//! The hydrodynamic entrance march (src/hydrodynamic.rs, `--entrance`) against an independent
//! reference of the same model, published values and its own limits.
//!
//! Print the tables with `cargo test --release --test hydrodynamic -- --nocapture`.

mod common;

#[path = "reference/pipe_developing.rs"]
#[allow(dead_code)]
mod pipe_developing;

use canalis::input::Input;
use canalis::pipeline::{self, EntranceOptions, SolveConfig, ENTRANCE_CELLS};
use common::rel_err;

/// A run with the entrance marches at the default entrance grid, no error estimate.
fn run_entrance(spec: &str) -> canalis::outcome::Outcome {
    let mut config = SolveConfig::new(Input::Builtin(spec.into()));
    config.error_estimate = pipeline::ErrorEstimate::Off;
    config.entrance = Some(EntranceOptions {
        cells: ENTRANCE_CELLS,
    });
    match pipeline::run(&config) {
        Ok(o) => o,
        Err(e) => panic!("{spec}: {e}"),
    }
}

/// Shah's 1978 correlation of the apparent friction (quoted in Shah & London 1978, from
/// memory; it fits the numerical solutions it was made from within ±2.4 %):
/// f_app·Re = 3.44/√x+ + (K(∞)/(4x+) + f·Re − 3.44/√x+)/(1 + C/x+²).
fn shah_1978(x: f64, k_inf: f64, f_re: f64, c: f64) -> f64 {
    let s = 3.44 / x.sqrt();
    s + (k_inf / (4.0 * x) + f_re - s) / (1.0 + c / (x * x))
}

/// Prints the march's table beside the correlation and returns the worst deviation from it
/// at x+ = 1e-3, 1e-2, 1e-1.
fn table(name: &str, h: &canalis::hydrodynamic::HydrodynamicEntrance, k_inf: f64, c: f64) -> f64 {
    let p = &h.passages[0];
    println!(
        "{name}: {} steps, {} solves, {} iterations, {:.2} s; K(∞) = {:.4}, L+ = {:?}, f·Re = {:.4}",
        h.steps, h.solves, h.iterations, h.seconds, p.k_infinity, p.length_plus, p.fanning_f_re
    );
    println!("      x+   f_app·Re   Shah 1978   (dev)       K(x)");
    let mut worst = 0.0f64;
    for (i, &x) in h.x_plus.iter().enumerate() {
        let s = shah_1978(x, k_inf, p.fanning_f_re, c);
        let dev = rel_err(p.apparent_f_re[i], s);
        println!(
            "{x:8.0e} {:10.4} {:10.4} ({dev:.1e}) {:10.4}",
            p.apparent_f_re[i], s, p.incremental_pressure_drop[i]
        );
        if [1e-3, 1e-2, 1e-1].iter().any(|&a| (a - x).abs() < 1e-9 * a) {
            worst = worst.max(dev);
        }
    }
    worst
}

/// Every shape: the thin-layer limit 3.44/√x+ near the inlet (Shah & London 1978, from
/// memory: 2 × Blasius' displacement thickness 1.7208) within 5 % at x+ = 1e-4, and the fully
/// developed limit f·Re + K(∞)/(4x+) at x+ = 1 (the definition of K, once settled).
fn check_limits(h: &canalis::hydrodynamic::HydrodynamicEntrance) {
    let p = &h.passages[0];
    let i = h
        .x_plus
        .iter()
        .position(|&x| (x - 1e-4).abs() < 1e-12)
        .unwrap();
    let lim = 3.44 / 1e-4f64.sqrt();
    assert!(
        rel_err(p.apparent_f_re[i], lim) < 0.05,
        "x+ = 1e-4: {} against {lim}",
        p.apparent_f_re[i]
    );
    assert!(h.settled, "the march did not settle by x+ = 1");
    let last = h.x_plus.len() - 1;
    let x = h.x_plus[last];
    let large = p.fanning_f_re + p.k_infinity / (4.0 * x);
    assert!(rel_err(p.apparent_f_re[last], large) < 1e-9);
}

/// Round tube: against the independent radial march of the same parabolised model
/// (tests/reference/pipe_developing.rs: 800 stretched radial points, BDF2 with 1 % steps and
/// Newton, converged to 1e-5; K(∞) = 1.2473, L+ = 0.05534) and against published values:
/// Shah's 1978 correlation within 3 % at x+ = 1e-3, 1e-2, 1e-1, K(∞) within 4 % of 1.25 and
/// L+ within 10 % of 0.056 (Shah & London 1978, from memory) — issue 17.
#[test]
fn round_tube_matches_the_radial_reference_and_shah() {
    let o = run_entrance("circle:d=8mm");
    let h = o
        .entrance
        .as_ref()
        .and_then(|e| e.hydrodynamic.as_ref())
        .expect("hydrodynamic entrance");
    let worst = table("round tube", h, 1.25, 0.000212);
    assert!(worst < 0.03, "{worst}");
    check_limits(h);
    let p = &h.passages[0];
    assert!((p.fanning_f_re - 16.0).abs() < 1e-3);
    assert!(rel_err(p.k_infinity, 1.25) < 0.04, "{}", p.k_infinity);
    let lp = p.length_plus.expect("settled");
    assert!(rel_err(lp, 0.056) < 0.10, "{lp}");
    // The same model solved independently: the step and grid error of the default march.
    let reference = pipe_developing::developing(&h.x_plus);
    let mut worst_ref = 0.0f64;
    for (i, r) in reference.iter().enumerate() {
        if r.x >= 1e-4 {
            worst_ref = worst_ref.max(rel_err(p.apparent_f_re[i], r.f_app_re));
        }
    }
    let k_ref = pipe_developing::k_infinity();
    let l_ref = pipe_developing::length_plus();
    println!(
        "against the radial reference: f_app·Re within {worst_ref:.1e} from x+ = 1e-4, K(∞) \
         {:.4} against {k_ref:.4} ({:.1e}), L+ {lp:.4} against {l_ref:.4} ({:.1e})",
        p.k_infinity,
        rel_err(p.k_infinity, k_ref),
        rel_err(lp, l_ref)
    );
    assert!(worst_ref < 0.01, "{worst_ref}");
    assert!(rel_err(p.k_infinity, k_ref) < 0.03);
    assert!(rel_err(lp, l_ref) < 0.05);
}

/// Square duct: K(∞) within 5 % of 1.43 and f_app·Re within 4 % of Shah's correlation with
/// the square's constants K(∞) = 1.43, C = 0.00029 (Shah & London 1978, from memory) —
/// issue 17.
#[test]
fn square_duct_matches_shah() {
    let o = run_entrance("square:side=8mm");
    let h = o
        .entrance
        .as_ref()
        .and_then(|e| e.hydrodynamic.as_ref())
        .expect("hydrodynamic entrance");
    let worst = table("square duct", h, 1.43, 0.00029);
    assert!(worst < 0.04, "{worst}");
    check_limits(h);
    let p = &h.passages[0];
    assert!(rel_err(p.k_infinity, 1.43) < 0.05, "{}", p.k_infinity);
}
