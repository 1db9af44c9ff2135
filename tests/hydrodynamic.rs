//! The hydrodynamic entrance march (src/hydrodynamic.rs, `--entrance`) against an independent
//! reference of the same model, published values and its own limits.
//!
//! Print the tables with `cargo test --release --test hydrodynamic -- --nocapture`.

mod common;

#[path = "reference/pipe_developing.rs"]
#[allow(dead_code)]
mod pipe_developing;

#[path = "reference/pipe_combined.rs"]
mod pipe_combined;

use common::{rel_err, run_entrance};

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
    let o = run_entrance("circle:d=8mm", None);
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
    let o = run_entrance("square:side=8mm", None);
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

/// Combined entry at Pr = 10⁴ equals the thermal entrance of fully developed velocity within
/// 1 % from x* = 1e-2 on (the velocity develops within x+ ≈ 0.06, x* ≈ 6e-6; issue 17): the
/// same grid, two independent marches.
#[test]
fn combined_entry_at_high_prandtl_is_the_thermal_entrance() {
    let o = run_entrance("circle:d=8mm", Some(1e4));
    let e = o.entrance.as_ref().unwrap();
    let c = e
        .hydrodynamic
        .as_ref()
        .and_then(|h| h.combined.as_ref())
        .expect("combined entry");
    assert_eq!(c.prandtl, 1e4);
    let (t, m) = (&e.thermal.passages[0], &c.thermal.passages[0]);
    let mut worst = 0.0f64;
    for (i, &x) in e.thermal.x_star.iter().enumerate() {
        let pairs = [
            (m.nusselt_t_local[i], t.nusselt_t_local[i]),
            (m.nusselt_t_mean[i], t.nusselt_t_mean[i]),
            (m.nusselt_h1_local[i], t.nusselt_h1_local[i]),
            (m.nusselt_h1_mean[i], t.nusselt_h1_mean[i]),
        ];
        let errs: Vec<f64> = pairs.iter().map(|&(a, b)| rel_err(a, b)).collect();
        let shown: Vec<String> = errs.iter().map(|e| format!("{e:.1e}")).collect();
        println!("{x:8.0e} {}", shown.join(" "));
        if x >= 1e-2 {
            worst = errs.iter().fold(worst, |a, &b| a.max(b));
        }
    }
    println!("combined (Pr = 1e4) against the thermal entrance, x* ≥ 1e-2: {worst:.1e}");
    assert!(worst < 0.01, "{worst}");
}

/// The pressure drop over a length in laminar flow includes the entrance region: the round
/// tube at Re ≈ 1610 over x+ ≈ 0.0155 against Shah's correlation (within 3 %, as the march's
/// f_app·Re above), the fully developed part G·L beside it, and the minor loss K·ρū²/2
/// (common practice, no source) added exactly.
#[test]
fn pressure_drop_over_a_length_includes_the_entrance() {
    let sb = common::Sandbox::new();
    let r = sb.report(&[
        "solve",
        "circle:d=6mm",
        "--viscosity",
        "1e-3",
        "--density",
        "1000",
        "--flow",
        "0.3L/min",
        "--length",
        "150mm",
        "--minor-loss",
        "1.5",
        "--json",
    ]);
    let op = &r;
    let dp = op["pressure_drop_pa"].as_f64().unwrap();
    let dp_fd = op["pressure_drop_fully_developed_pa"].as_f64().unwrap();
    let minor = op["minor_loss_pa"].as_f64().unwrap();
    let (d, mu, rho, q) = (0.006, 1e-3, 1000.0, 0.3e-3 / 60.0);
    let area = std::f64::consts::PI * d * d / 4.0;
    let u = q / area;
    let re = rho * u * d / mu;
    let x = 0.15 / (d * re);
    // Hagen–Poiseuille (exact): Δp = 32·μ·ū·L/D².
    assert!(rel_err(dp_fd, 32.0 * mu * u * 0.15 / (d * d)) < 1e-4);
    assert!(rel_err(minor, 1.5 * 0.5 * rho * u * u) < 1e-9);
    let f_app_re = shah_1978(x, 1.25, 16.0, 0.000212);
    let expected = 2.0 * rho * u * u * f_app_re * x;
    println!(
        "x+ = {x:.4}: entrance Δp {:.3} Pa against Shah {expected:.3} Pa, fully developed {dp_fd:.3}",
        dp - minor
    );
    assert!(rel_err(dp - minor, expected) < 0.03);
    assert!(op["pressure_drop_model"]
        .as_str()
        .unwrap()
        .contains("developing"));
}

/// Bad values of the new options are refused before any solve, naming the option.
#[test]
fn entrance_options_are_checked() {
    let sb = common::Sandbox::new();
    for (args, option) in [
        (
            vec!["solve", "circle:d=6mm", "--prandtl", "-1"],
            "--prandtl",
        ),
        (
            vec!["solve", "circle:d=6mm", "--prandtl", "nan"],
            "--prandtl",
        ),
        (
            vec!["solve", "circle:d=6mm", "--minor-loss", "1"],
            "--minor-loss",
        ),
        (
            vec![
                "solve",
                "circle:d=6mm",
                "--fluid",
                "water",
                "--temperature",
                "20C",
                "--flow",
                "1L/min",
                "--length",
                "1m",
                "--minor-loss",
                "-2",
            ],
            "--minor-loss",
        ),
    ] {
        sb.input_error(&args, &[option]);
    }
}

/// Combined entry of the round tube at Pr = 0.7 against the independent radial march of the
/// same model (tests/reference/pipe_combined.rs: energy with the developing velocity, converged
/// to 2e-5; its inlet limit is Pohlhausen's flat plate): every local and mean Nusselt number
/// from x* = 1e-4 on (issue 17).
#[test]
fn combined_entry_of_the_round_tube_matches_the_radial_reference() {
    let o = run_entrance("circle:d=8mm", Some(0.7));
    let e = o.entrance.as_ref().unwrap();
    let c = e
        .hydrodynamic
        .as_ref()
        .and_then(|h| h.combined.as_ref())
        .expect("combined entry");
    let m = &c.thermal.passages[0];
    let reference = pipe_combined::combined(0.7, &c.thermal.x_star);
    let mut worst = [0.0f64; 2];
    println!("      x*    Nu_x,T (err)      Nu_m,T (err)      Nu_x,H (err)      Nu_m,H (err)");
    for (i, r) in reference.iter().enumerate() {
        let pairs = [
            (m.nusselt_t_local[i], r.nu_t_local),
            (m.nusselt_t_mean[i], r.nu_t_mean),
            (m.nusselt_h1_local[i], r.nu_h_local),
            (m.nusselt_h1_mean[i], r.nu_h_mean),
        ];
        let errs: Vec<f64> = pairs.iter().map(|&(a, b)| rel_err(a, b)).collect();
        println!(
            "{:8.0e} {}",
            r.x_star,
            pairs
                .iter()
                .zip(&errs)
                .map(|(&(a, _), e)| format!("{a:9.4} ({e:.1e})"))
                .collect::<Vec<_>>()
                .join(" ")
        );
        let w = errs.iter().fold(0.0f64, |a, &b| a.max(b));
        if r.x_star >= 1e-3 {
            worst[1] = worst[1].max(w);
        } else if r.x_star >= 1e-4 {
            worst[0] = worst[0].max(w);
        }
    }
    println!(
        "worst: {:.2e} (1e-4 ≤ x* < 1e-3), {:.2e} (x* ≥ 1e-3)",
        worst[0], worst[1]
    );
    // Measured: 2.1e-2 and 1.3e-2 (the thermal layer near x* = 1e-4 spans about five cells).
    assert!(worst[0] < 0.03, "{worst:?}");
    assert!(worst[1] < 0.02, "{worst:?}");
    // Shah & London 1978's thermal entrance lengths for the round tube with simultaneously
    // developing flow at Pr = 0.7 (from memory): L*_th,T = 0.037, L*_th,H = 0.053, against
    // 0.0335 and 0.0430 with the velocity developed. Their tabulated local and mean Nusselt
    // numbers at Pr = 0.7 are not remembered reliably enough to test against; the radial
    // reference above stands in for them. Measured: 0.0371 (+0.2 %) and 0.0514 (−3.0 %).
    let (lt, lh) = (m.length_star_t.unwrap(), m.length_star_h1.unwrap());
    println!("L*_th: T {lt:.4}, H1 {lh:.4}");
    assert!(rel_err(lt, 0.037) < 0.02, "L*_th,T {lt}");
    assert!(rel_err(lh, 0.053) < 0.05, "L*_th,H {lh}");
}
