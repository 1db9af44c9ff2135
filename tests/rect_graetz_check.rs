//! Self-checks of the independent rectangular-duct Graetz reference
//! (tests/reference/rect_graetz.rs). Fully developed values: Shah & London 1978,
//! quoted from memory.

#[path = "reference/rect_graetz.rs"]
mod rect_graetz;

use rect_graetz::*;

const STATIONS: [f64; 13] = [
    1e-4, 2e-4, 5e-4, 1e-3, 2e-3, 5e-3, 1e-2, 2e-2, 5e-2, 0.1, 0.2, 0.5, 1.0,
];

fn print(tag: &str, v: &[RectPoint]) {
    println!("{tag}\n      x*     Nu_x,T   Nu_m,T   Nu_x,H1  Nu_m,H1");
    for p in v {
        println!(
            "{:9.1e} {:8.4} {:8.4} {:8.4} {:8.4}",
            p.x_star, p.nu_t_local, p.nu_t_mean, p.nu_h_local, p.nu_h_mean
        );
    }
}

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

fn check(aspect: f64, nu_t: f64, nu_h: f64, f_re: f64) {
    let g = grids(aspect, &STATIONS, N_COARSE, K_STEPS);
    let r3 = richardson3(&g[0].1, &g[1].1, &g[2].1);
    let r2 = richardson2(&g[1].1, &g[2].1);
    for (i, (fr, v)) in g.iter().enumerate() {
        println!("grid {} f.Re = {fr:.5}", N_COARSE << i);
        print(&format!("aspect {aspect} grid {}", N_COARSE << i), v);
    }
    let fr2 = (4.0 * g[2].0 - g[1].0) / 3.0;
    let fr3 = (64.0 * g[2].0 - 20.0 * g[1].0 + g[0].0) / 45.0;
    println!("f.Re extrapolated: 2-grid {fr2:.5}, 3-grid {fr3:.5} (Shah & London {f_re})");
    print(&format!("aspect {aspect} Richardson 2-grid"), &r2);
    print(&format!("aspect {aspect} Richardson 3-grid"), &r3);
    println!("relative difference 3-grid vs 2-grid Richardson (accuracy estimate):");
    for (a, b) in r3.iter().zip(&r2) {
        println!(
            "{:9.1e} {:9.2e} {:9.2e} {:9.2e} {:9.2e}",
            a.x_star,
            rel(b.nu_t_local, a.nu_t_local),
            rel(b.nu_t_mean, a.nu_t_mean),
            rel(b.nu_h_local, a.nu_h_local),
            rel(b.nu_h_mean, a.nu_h_mean)
        );
    }
    let t = std::time::Instant::now();
    let (api, mt_int) = rectangle_detail(aspect, &STATIONS);
    println!(
        "rectangle({aspect}) took {:.2} s",
        t.elapsed().as_secs_f64()
    );
    print(&format!("aspect {aspect} REFERENCE (rectangle())"), &api);
    println!("validation of the integrated mean on T: direct -ln(θb)/4x* vs integrated local");
    for (p, m) in api.iter().zip(&mt_int) {
        println!(
            "{:9.1e} {:9.4} {:9.4} {:9.2e}",
            p.x_star,
            p.nu_t_mean,
            m,
            rel(*m, p.nu_t_mean)
        );
        assert!(rel(*m, p.nu_t_mean) < 1e-2);
    }
    let t = std::time::Instant::now();
    let _ = rectangle(aspect, &STATIONS[..1]);
    println!(
        "rectangle({aspect}) [API] took {:.2} s",
        t.elapsed().as_secs_f64()
    );
    let last = api.last().unwrap();
    println!(
        "fully developed: Nu_T {:.5} ({nu_t}), Nu_H1 {:.5} ({nu_h})",
        last.nu_t_local, last.nu_h_local
    );
    assert!(rel(fr3, f_re) < 1e-3);
    assert!(rel(last.nu_t_local, nu_t) < 1.5e-3);
    assert!(rel(last.nu_h_local, nu_h) < 1.5e-3);
    for w in api.windows(2) {
        let dec = |a: f64, b: f64| b < a * (1.0 + 1e-6);
        assert!(dec(w[0].nu_t_local, w[1].nu_t_local) && dec(w[0].nu_h_local, w[1].nu_h_local));
        assert!(dec(w[0].nu_t_mean, w[1].nu_t_mean) && dec(w[0].nu_h_mean, w[1].nu_h_mean));
    }
    for p in &api {
        assert!(p.nu_t_mean > p.nu_t_local && p.nu_h_mean > p.nu_h_local);
        assert!(p.nu_h_local > p.nu_t_local);
    }
}

#[test]
fn square_duct() {
    check(1.0, 2.976, 3.608, 14.227);
}

#[test]
fn rectangle_half() {
    check(0.5, 3.391, 4.123, 15.548);
}
