//! Issue 18 through the real binary: an answer at every flow rate. The regime, the friction
//! factor and the figures the correlations give beyond the laminar range, passages in
//! different regimes, `--pressure-drop` with `--length`, hydraulic resistance, the units of
//! the trades, and every bad combination of the new options (exit status 2 naming the option).
//!
//! Reference values are computed here, independently of `canalis::correlations`: the
//! Colebrook–White equation is solved below by its own fixed-point iteration.

mod common;

use common::{num, rel_err, shipped_path, Sandbox};
use serde_json::Value;
use std::f64::consts::PI;

/// Darcy friction factor from the Colebrook–White equation
/// 1/√f = −2·log10((ε/D)/3.7 + 2.51/(Re·√f)) (C. F. Colebrook, J. Inst. Civ. Eng. 11 (1939)
/// 133–156), solved by fixed-point iteration on x = 1/√f (a contraction at turbulent Re).
fn colebrook_white(re: f64, relative_roughness: f64) -> f64 {
    let mut x = 8.0_f64;
    for _ in 0..200 {
        x = -2.0 * (relative_roughness / 3.7 + 2.51 * x / re).log10();
    }
    1.0 / (x * x)
}

fn string(r: &Value, key: &str) -> String {
    r[key]
        .as_str()
        .unwrap_or_else(|| panic!("{key} is not a string: {r:#}"))
        .to_string()
}

fn warnings(r: &Value) -> Vec<String> {
    r["warnings"]
        .as_array()
        .map(|a| {
            a.iter()
                .filter_map(|w| w.as_str().map(String::from))
                .collect()
        })
        .unwrap_or_default()
}

/// A 6 mm tube with water at 40 °C: the mould maker's passage of issue 18.
fn tube(sb: &Sandbox, extra: &[&str]) -> Value {
    let mut args = vec![
        "solve",
        "circle:d=6mm",
        "--cells",
        "100",
        "--json",
        "--fluid",
        "water",
        "--temperature",
        "40C",
    ];
    args.extend_from_slice(extra);
    sb.report(&args)
}

#[test]
fn issue_18_a_6mm_tube_at_3_l_min_is_turbulent_and_follows_colebrook_white() {
    let sb = Sandbox::new();
    let r = tube(&sb, &["--flow", "3L/min", "--length", "0.1m"]);
    assert_eq!(string(&r, "regime"), "turbulent", "{r:#}");
    let re = num(&r, "reynolds");
    assert!(re > 1e4, "Re = {re}");
    // Darcy friction factor against Colebrook–White solved here at the same Re (smooth wall).
    let f = num(&r, "darcy_friction_factor");
    let reference = colebrook_white(re, 0.0);
    assert!(
        rel_err(f, reference) < 0.015,
        "f = {f}, Colebrook–White {reference}"
    );
    // Darcy–Weisbach (definition, common practice, no source): G = f·ρ·ū²/(2·D), and the
    // fully developed pressure drop G·L; the mean wall shear from the force balance G·D/4.
    let (rho, d) = (num(&r, "fluid.density_kg_m3"), 6e-3);
    let mean = num(&r, "mean_velocity_m_s");
    let g = num(&r, "pressure_gradient_pa_m");
    assert!(
        rel_err(g, f * rho * mean * mean / (2.0 * d)) < 1e-3,
        "{r:#}"
    );
    assert!(rel_err(num(&r, "pressure_drop_pa"), 0.1 * g) < 1e-12);
    assert!(rel_err(num(&r, "wall_shear_mean_pa"), g * d / 4.0) < 1e-3);
    // Resistances are Δp/Q and G/Q (definitions).
    let q = num(&r, "flow_rate_m3_s");
    assert!(rel_err(num(&r, "hydraulic_resistance_pa_s_m3"), 0.1 * g / q) < 1e-12);
    assert!(rel_err(num(&r, "hydraulic_resistance_per_length_pa_s_m4"), g / q) < 1e-12);
    // Not the laminar figures: Hagen–Poiseuille G = 128·μ·Q/(π·D⁴) (exact) is far below.
    let mu = num(&r, "fluid.viscosity_pa_s");
    assert!(g > 3.0 * 128.0 * mu * q / (PI * d.powi(4)), "{r:#}");
    // The unit problem stays laminar; the extremes are not estimated.
    assert!(rel_err(num(&r, "fanning_f_re"), 16.0) < 1e-3);
    for key in ["wall_shear_max_pa", "wall_shear_min_pa", "max_velocity_m_s"] {
        assert!(r[key].is_null(), "{key}: {r:#}");
    }
    // Which model gave each figure.
    let models = &r["models"];
    let friction = models["darcy_friction_factor"].as_str().unwrap_or("");
    assert!(friction.contains("Colebrook"), "{models:#}");
    assert!(friction.contains("Jones 1976"), "{models:#}");
    let film = models["heat_transfer_coefficient_h1_w_m2k"]
        .as_str()
        .unwrap_or("");
    assert!(film.contains("Gnielinski"), "{models:#}");
    assert!(models["pressure_gradient_pa_m"].is_string(), "{models:#}");
    // Turbulent entrance lengths, not the laminar rule's metres: 1.359·Re^(1/4)·D (Zhi-qing
    // 1982, from memory, the value canalis documents) and about 10·D.
    let lh = num(&r, "entrance_length_hydrodynamic_m");
    assert!(rel_err(lh, 1.359 * re.powf(0.25) * d) < 1e-3, "L_h = {lh}");
    assert!(rel_err(num(&r, "entrance_length_thermal_m"), 10.0 * d) < 1e-3);
    // Film coefficients against Gnielinski's equation with his entrance factor, evaluated here
    // (V. Gnielinski, Int. Chem. Eng. 16 (1976) 359–368): Nu = (f/8)(Re − 1000)Pr /
    // (1 + 12.7·√(f/8)·(Pr^(2/3) − 1)) · (1 + (D/L)^(2/3)), f = (1.8·log10 Re − 1.5)⁻².
    let (pr, k) = (num(&r, "prandtl"), num(&r, "fluid.conductivity_w_mk"));
    let fk = (1.8 * re.log10() - 1.5).powi(-2);
    let nu = (fk / 8.0) * (re - 1000.0) * pr
        / (1.0 + 12.7 * (fk / 8.0).sqrt() * (pr.powf(2.0 / 3.0) - 1.0))
        * (1.0 + (d / 0.1).powf(2.0 / 3.0));
    let h = num(&r, "heat_transfer_coefficient_h1_w_m2k");
    assert!(
        rel_err(h, nu * k / d) < 0.01,
        "h = {h}, Gnielinski {}",
        nu * k / d
    );
    assert!(
        warnings(&r).iter().any(|w| w.contains("turbulent")),
        "{r:#}"
    );
}

#[test]
fn roughness_raises_the_friction_factor() {
    let sb = Sandbox::new();
    let smooth = tube(&sb, &["--flow", "3L/min"]);
    let rough = tube(&sb, &["--flow", "3L/min", "--roughness", "0.06mm"]);
    let (fs, fr) = (
        num(&smooth, "darcy_friction_factor"),
        num(&rough, "darcy_friction_factor"),
    );
    assert!(fr > 1.2 * fs, "smooth {fs}, rough {fr}");
    // Colebrook–White at ε/D = 0.01, solved here.
    let re = num(&rough, "reynolds");
    assert!(rel_err(fr, colebrook_white(re, 0.01)) < 0.02, "{rough:#}");
    assert!(rel_err(num(&rough, "roughness_m"), 6e-5) < 1e-12);
    assert!(num(&rough, "pressure_gradient_pa_m") > num(&smooth, "pressure_gradient_pa_m"));
}

#[test]
fn a_transitional_point_lies_between_laminar_and_turbulent() {
    // Re = 4ρQ/(πμD) = 3000 with μ = 1 mPa·s, ρ = 1000 kg/m³, D = 6 mm (definition).
    let sb = Sandbox::new();
    let (mu, rho, d, re) = (1e-3, 1000.0, 6e-3, 3000.0);
    let q = re * PI * mu * d / (4.0 * rho);
    let flow = format!("{q}");
    let r = sb.report(&[
        "solve",
        "circle:d=6mm",
        "--cells",
        "100",
        "--json",
        "--viscosity",
        "1e-3",
        "--density",
        "1000",
        "--flow",
        &flow,
    ]);
    assert_eq!(string(&r, "regime"), "transitional", "{r:#}");
    assert!(rel_err(num(&r, "reynolds"), re) < 1e-9);
    let f = num(&r, "darcy_friction_factor");
    // Hagen–Poiseuille 64/Re (exact) below, Colebrook–White (solved here) above.
    let (laminar, turbulent) = (64.0 / re, colebrook_white(re, 0.0));
    assert!(
        laminar < f && f < turbulent,
        "{laminar} < {f} < {turbulent}"
    );
    let g = num(&r, "pressure_gradient_pa_m");
    let g_laminar = 128.0 * mu * q / (PI * d.powi(4));
    let g_turbulent = turbulent * rho * (q / (PI * d * d / 4.0)).powi(2) / (2.0 * d);
    assert!(
        g_laminar < g && g < g_turbulent,
        "{g_laminar} < {g} < {g_turbulent}"
    );
    assert!(
        r["models"]["darcy_friction_factor"]
            .as_str()
            .unwrap_or("")
            .contains("interpolation"),
        "{r:#}"
    );
}

#[test]
fn issue_18_a_passage_that_leaves_the_laminar_range_is_named() {
    // shapes/cold_plate.svg: three channels under one gradient; at 1 L/min of water at 40 °C
    // the section's Re (on its D_h) is about 1340, the largest channel's about 2300.
    let sb = Sandbox::new();
    let r = sb.report(&[
        "solve",
        &shipped_path("cold_plate.svg"),
        "--cells",
        "200",
        "--json",
        "--fluid",
        "water",
        "--temperature",
        "40C",
        "--flow",
        "1L/min",
    ]);
    assert!(num(&r, "reynolds") < 2000.0, "{r:#}");
    let passages = r["passages"].as_array().expect("passages");
    assert_eq!(passages.len(), 3);
    let mut named = 0;
    let mut total = 0.0;
    for (i, p) in passages.iter().enumerate() {
        let re = num(p, "reynolds");
        total += num(p, "flow_rate_m3_s");
        assert!(
            p["regime"].is_string() && p["wall_shear_mean_pa"].is_number(),
            "{p:#}"
        );
        let label = format!("passage {} of 3", i + 1);
        let warned = warnings(&r)
            .iter()
            .any(|w| w.contains(&label) && w.contains("above 2000"));
        assert_eq!(warned, re > 2000.0, "{label} at Re {re}: {r:#}");
        if re > 2000.0 {
            named += 1;
            assert_ne!(p["regime"], "laminar", "{p:#}");
            assert!(!p["warnings"].as_array().unwrap().is_empty(), "{p:#}");
        }
    }
    assert!(named >= 1, "no passage above Re 2000: {r:#}");
    // The passages' flows add up to the flow given (the common gradient found by bisection).
    assert!(rel_err(total, 1e-3 / 60.0) < 1e-9, "{total}");
}

#[test]
fn a_pressure_drop_over_a_length_finds_the_flow_that_reproduces_it() {
    let sb = Sandbox::new();
    let r = tube(&sb, &["--pressure-drop", "10kPa", "--length", "0.1m"]);
    assert!(rel_err(num(&r, "pressure_drop_pa"), 1e4) < 1e-12, "{r:#}");
    assert!(rel_err(num(&r, "pressure_gradient_pa_m"), 1e5) < 1e-12);
    assert!(r["models"]["flow_rate_m3_s"].is_string(), "{r:#}");
    // The flow found, given back as a flow rate, gives the same pressure drop.
    let q = format!("{}", num(&r, "flow_rate_m3_s"));
    let back = tube(&sb, &["--flow", &q, "--length", "0.1m"]);
    assert!(
        rel_err(num(&back, "pressure_drop_pa"), 1e4) < 1e-6,
        "{}",
        num(&back, "pressure_drop_pa")
    );
    assert_eq!(r["regime"], back["regime"]);
}

#[test]
fn microfluidic_flow_and_the_hagen_poiseuille_resistance() {
    // R' = 128·μ/(π·D⁴) and R = R'·L for a circle in laminar flow (Hagen–Poiseuille, exact).
    let sb = Sandbox::new();
    let r = sb.report(&[
        "solve",
        "circle:d=100um",
        "--cells",
        "100",
        "--json",
        "--viscosity",
        "1e-3",
        "--density",
        "1000",
        "--flow",
        "10uL/min",
        "--length",
        "10mm",
    ]);
    assert_eq!(string(&r, "regime"), "laminar");
    assert!(rel_err(num(&r, "flow_rate_m3_s"), 10e-9 / 60.0) < 1e-12);
    let exact = 128.0 * 1e-3 / (PI * 1e-4_f64.powi(4));
    let per_length = num(&r, "hydraulic_resistance_per_length_pa_s_m4");
    assert!(rel_err(per_length, exact) < 1e-3, "{per_length} vs {exact}");
    let over_length = num(&r, "hydraulic_resistance_pa_s_m3");
    assert!(rel_err(over_length, exact * 0.01) < 1e-3, "{over_length}");
    assert_eq!(
        r["models"]["darcy_friction_factor"],
        "laminar (canalis cut-cell solution)"
    );
    // f_D = 64/Re in laminar flow of a circle (Hagen–Poiseuille, exact).
    let f = num(&r, "darcy_friction_factor");
    assert!(rel_err(f * num(&r, "reynolds"), 64.0) < 1e-3);
}

/// A cheap laminar run (viscous fluid, small tube) with `extra`, its report.
fn laminar_run(sb: &Sandbox, extra: &[&str]) -> Value {
    let mut args = vec![
        "solve",
        "circle:d=1mm",
        "--cells",
        "24",
        "--json",
        "--viscosity",
        "1",
        "--density",
        "1000",
    ];
    args.extend_from_slice(extra);
    sb.report(&args)
}

#[test]
fn every_unit_of_the_trades_parses_from_the_command_line() {
    // Definitions: 1 L = 1e-3 m³, 1 US gallon = 3.785411784 L (exact), 1 psi =
    // 6894.757293168 Pa and 1 ft = 0.3048 m (exact by definition), 1 bar = 1e5 Pa.
    let sb = Sandbox::new();
    let flows = [
        ("5uL/min", 5e-9 / 60.0),
        ("5µL/min", 5e-9 / 60.0),
        ("5mL/h", 5e-6 / 3600.0),
        ("5mL/s", 5e-6),
        ("5cm3/s", 5e-6),
        ("5L/h", 5e-3 / 3600.0),
        ("5m3/h", 5.0 / 3600.0),
        ("5gpm", 5.0 * 3.785411784e-3 / 60.0),
        ("5L/min", 5e-3 / 60.0),
    ];
    for (text, si) in flows {
        let r = laminar_run(&sb, &["--flow", text]);
        assert!(rel_err(num(&r, "flow_rate_m3_s"), si) < 1e-12, "{text}");
    }
    let psi = 0.45359237 * 9.80665 / (0.0254 * 0.0254);
    let gradients = [
        ("3Pa/m", 3.0),
        ("3kPa/m", 3e3),
        ("3bar/m", 3e5),
        ("3mbar/mm", 3e5),
        ("3psi/ft", 3.0 * psi / 0.3048),
    ];
    for (text, si) in gradients {
        let r = laminar_run(&sb, &["--dpdx", text]);
        assert!(
            rel_err(num(&r, "pressure_gradient_pa_m"), si) < 1e-12,
            "{text}"
        );
    }
    let drops = [
        ("7Pa", 7.0),
        ("7kPa", 7e3),
        ("7bar", 7e5),
        ("7mbar", 700.0),
        ("7psi", 7.0 * psi),
    ];
    for (text, si) in drops {
        let r = laminar_run(&sb, &["--pressure-drop", text, "--length", "1m"]);
        assert!(rel_err(num(&r, "pressure_drop_pa"), si) < 1e-12, "{text}");
    }
}

#[test]
fn issue_18_bad_combinations_exit_2_naming_the_option() {
    let sb = Sandbox::new();
    let fluid = ["--viscosity", "1e-3", "--density", "1000"];
    let with = |more: &[&'static str]| -> Vec<&'static str> {
        let mut v = vec![
            "solve",
            "circle:d=6mm",
            "--cells",
            "1500",
            "--max-iterations",
            "1",
        ];
        v.extend_from_slice(&fluid);
        v.extend_from_slice(more);
        v
    };
    // Each refused before any grid is laid (a solve would exit 1 at one iteration).
    let cases: Vec<(Vec<&str>, Vec<&str>)> = vec![
        (
            with(&["--pressure-drop", "10kPa"]),
            vec!["--pressure-drop", "--length"],
        ),
        (
            with(&[
                "--pressure-drop",
                "10kPa",
                "--length",
                "1m",
                "--dpdx",
                "100",
            ]),
            vec!["--pressure-drop"],
        ),
        (
            with(&[
                "--pressure-drop",
                "10kPa",
                "--length",
                "1m",
                "--flow",
                "1L/min",
            ]),
            vec!["--pressure-drop"],
        ),
        (
            with(&["--pressure-drop", "-1kPa", "--length", "1m"]),
            vec!["--pressure-drop", "positive"],
        ),
        (
            with(&["--pressure-drop", "10kPa/m", "--length", "1m"]),
            vec!["--pressure-drop", "kPa/m"],
        ),
        (
            with(&["--flow", "1L/min", "--roughness", "-1mm"]),
            vec!["--roughness"],
        ),
        (
            with(&["--flow", "1L/min", "--roughness", "1 furlong"]),
            vec!["--roughness"],
        ),
        (with(&["--flow", "1 L/fortnight"]), vec!["--flow", "uL/min"]),
        (with(&["--dpdx", "1 bar/furlong"]), vec!["--dpdx", "psi/ft"]),
    ];
    for (args, needles) in &cases {
        sb.input_error(args, needles);
    }
    sb.input_error(
        &["solve", "circle:d=6mm", "--roughness", "0.1mm"],
        &["--roughness", "operating point"],
    );
    // A roughness as tall as the passage is wide is refused (it needs D_h: after the solve).
    sb.input_error(
        &[
            "solve",
            "circle:d=6mm",
            "--cells",
            "40",
            "--flow",
            "3L/min",
            "--viscosity",
            "1e-3",
            "--density",
            "1000",
            "--roughness",
            "4mm",
        ],
        &["--roughness"],
    );
}
