//! Self-checks of the independent round-tube Graetz reference (tests/reference/graetz.rs).
//! Run: cargo test --release --test graetz_reference_check -- --nocapture

#[path = "reference/graetz.rs"]
mod graetz;

use graetz::*;
use std::sync::OnceLock;

fn series() -> &'static Series {
    static S: OnceLock<Series> = OnceLock::new();
    S.get_or_init(|| Series::new(NUMERIC_MODES))
}

fn rel(a: f64, b: f64) -> f64 {
    (a / b - 1.0).abs()
}

/// x* = 1e-5, 2e-5, 5e-5, …, 0.5, 1.
fn table_stations() -> Vec<f64> {
    let mut v = Vec::new();
    let mut d = 1e-5;
    while d < 1.5 {
        for m in [1.0, 2.0, 5.0] {
            if m * d <= 1.0 + 1e-12 {
                v.push(m * d);
            }
        }
        d *= 10.0;
    }
    v
}

#[test]
fn eigenvalues_against_literature() {
    let s = series();
    // Brown 1960 (as tabulated in Shah & London 1978; from memory): T eigenvalues.
    // Tolerance: half a unit in the last quoted digit.
    let brown = [
        (2.7043644, 5e-8),
        (6.679031, 5e-7),
        (10.67338, 5e-6),
        (14.67108, 5e-6),
        (18.66987, 5e-6),
    ];
    for (m, (b, tol)) in s.t_numeric.iter().zip(brown) {
        println!(
            "T λ_{} = {:.10}  (Brown {b})  G = {:.8}",
            m.n,
            m.lambda,
            m.coef * m.lambda * m.lambda / 8.0
        );
        assert!(
            (m.lambda - b).abs() <= tol,
            "T eigenvalue {} {} vs {b}",
            m.n,
            m.lambda
        );
    }
    // G_0 = 0.74877 (Shah & London 1978, from memory).
    let g0 = s.t_numeric[0].coef * s.t_numeric[0].lambda.powi(2) / 8.0;
    assert!((g0 - 0.74877).abs() < 1e-5, "G_0 = {g0}");
    // Siegel, Sparrow & Hallman 1958 (from memory): H eigenvalues squared.
    let ssh = [
        (25.6796, 5e-5),
        (83.8618, 5e-5),
        (174.167, 5e-4),
        (296.536, 5e-4),
        (450.947, 5e-4),
    ];
    for (m, (b, tol)) in s.h_numeric.iter().zip(ssh) {
        println!(
            "H λ_{} = {:.10}  λ² = {:.6} (SSH {b})  B = {:.8}",
            m.n,
            m.lambda,
            m.lambda * m.lambda,
            m.coef
        );
        assert!(
            (m.lambda * m.lambda - b).abs() <= tol,
            "H eigenvalue {} {} vs {b}",
            m.n,
            m.lambda
        );
    }
    assert!((s.h_numeric[0].lambda - 5.0675).abs() < 5e-5);
    // Sturm–Liouville spacing → 4 and the Sellars–Tribus–Klein phases 8/3, 4/3.
    let t = s.t_numeric.last().unwrap();
    let h = s.h_numeric.last().unwrap();
    println!(
        "last numeric modes: T n={} λ={:.9} (4n+8/3 = {:.9}); H n={} λ={:.9} (4n+4/3 = {:.9})",
        t.n,
        t.lambda,
        4.0 * t.n as f64 + 8.0 / 3.0,
        h.n,
        h.lambda,
        4.0 * h.n as f64 + 4.0 / 3.0
    );
    assert!((t.lambda - 4.0 * t.n as f64 - 8.0 / 3.0).abs() < 1e-4);
    assert!((h.lambda - 4.0 * h.n as f64 - 4.0 / 3.0).abs() < 1e-2);
}

/// Kummer's function M(a, b, z) by its power series (adequate for the small z used here).
fn kummer(a: f64, b: f64, z: f64) -> f64 {
    let (mut t, mut s, mut big) = (1.0f64, 1.0f64, 1.0f64);
    for k in 0..2000 {
        let k = k as f64;
        t *= (a + k) / (b + k) * z / (k + 1.0);
        s += t;
        big = big.max(t.abs());
        if t.abs() < 1e-18 * big {
            break;
        }
    }
    s
}

/// Root of f in [lo, hi] by bisection.
fn bisect(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64) -> f64 {
    let flo = f(lo);
    assert!((flo < 0.0) != (f(hi) < 0.0), "no sign change");
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if (f(mid) < 0.0) == (flo < 0.0) {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo < 1e-15 * hi {
            break;
        }
    }
    0.5 * (lo + hi)
}

#[test]
fn eigenvalues_against_closed_form() {
    // Independent closed form: R(r) = e^{−λr²/2} M(1/2 − λ/4, 1, λr²) (Kummer's function).
    // T: M(a, 1, λ) = 0. H: R'(1) = 0 ⇔ M(a, 1, λ) = 2a M(a + 1, 2, λ) (M' = (a/b) M(a+1, b+1)).
    // Also the expansion coefficients C_n = −2/(λ_n S_n(1)) of θ = Σ C_n R_n e^{−2λ²x*}
    // (R_n(0) = 1): 1.47643, −0.80612, 0.58876 (Shah & London 1978, from memory).
    let s = series();
    let ft = |l: f64| kummer(0.5 - l / 4.0, 1.0, l);
    let fh = |l: f64| {
        let a = 0.5 - l / 4.0;
        kummer(a, 1.0, l) - 2.0 * a * kummer(a + 1.0, 2.0, l)
    };
    for m in &s.t_numeric[..5] {
        let k = bisect(ft, m.lambda - 1e-3, m.lambda + 1e-3);
        println!("T λ_{}: shooting {:.15}  Kummer {:.15}", m.n, m.lambda, k);
        assert!((k - m.lambda).abs() < 1e-11 * k);
    }
    for m in &s.h_numeric[..5] {
        let k = bisect(fh, m.lambda - 1e-3, m.lambda + 1e-3);
        println!("H λ_{}: shooting {:.15}  Kummer {:.15}", m.n, m.lambda, k);
        assert!((k - m.lambda).abs() < 1e-11 * k);
    }
    for (m, c) in s.t_numeric.iter().zip([1.47643, -0.80612, 0.58876]) {
        let cn = -2.0 / (m.lambda * shoot(m.lambda).s);
        println!("C_{} = {cn:.8} (Shah & London {c})", m.n);
        assert!((cn - c).abs() < 1e-5);
    }
}

#[test]
fn asymptotic_tail() {
    let s = series();
    // Leading constants with a free constant term: must reproduce the Lévêque-derived C, D.
    for (bc, modes, c, lead, pows) in [
        (
            Bc::Dirichlet,
            &s.t_numeric,
            tail_constant_t(),
            1.0 / 3.0,
            vec![0.0, 4.0 / 3.0, 2.0, 8.0 / 3.0],
        ),
        (
            Bc::Neumann,
            &s.h_numeric,
            tail_constant_h(),
            5.0 / 3.0,
            vec![0.0, 2.0 / 3.0, 4.0 / 3.0, 5.0 / 3.0, 2.0],
        ),
    ] {
        let sel: Vec<&Mode> = modes.iter().filter(|m| m.n >= 200).collect();
        let g = |m: &Mode| {
            if bc == Bc::Dirichlet {
                m.coef * m.lambda * m.lambda / 8.0
            } else {
                m.coef
            }
        };
        let x: Vec<Vec<f64>> = sel
            .iter()
            .map(|m| pows.iter().map(|p| m.lambda.powf(-p)).collect())
            .collect();
        let y: Vec<f64> = sel.iter().map(|m| g(m) * m.lambda.powf(lead)).collect();
        let f = lsq(&x, &y);
        println!(
            "{bc:?}: fitted leading constant {:.10}, from the Lévêque limit {:.10}",
            f[0], c
        );
        // H converges slowly (corrections ∝ λ^{-2/3}), so its free constant is less sharp.
        assert!(rel(f[0], c) < if bc == Bc::Dirichlet { 1e-8 } else { 2e-6 });
    }
    // A tail fitted on n ∈ [100, 200] predicts the numerical modes n ∈ (200, 400].
    for (bc, modes) in [(Bc::Dirichlet, &s.t_numeric), (Bc::Neumann, &s.h_numeric)] {
        let tail = Tail::fit(bc, modes, 100, 200);
        let (mut el, mut ec) = (0.0f64, 0.0f64);
        for m in modes.iter().filter(|m| m.n > 200) {
            let p = tail.mode(m.n);
            el = el.max((p.lambda - m.lambda).abs());
            ec = ec.max(rel(p.coef, m.coef));
        }
        println!("{bc:?}: tail fitted on [100,200], max error on (200,400]: λ {el:.2e}, coefficient {ec:.2e}");
        assert!(el < 1e-8 && ec < 1e-8);
    }
}

#[test]
fn coefficient_sums_at_the_inlet() {
    // θ_b(0) = Σ A_n = 1 and (Θ_w − Θ_b)(0) = 11/48 − Σ B_n = 0.
    let s = series();
    for (modes, tail, want) in [
        (&s.t_numeric, &s.t_tail, 1.0),
        (&s.h_numeric, &s.h_tail, 11.0 / 48.0),
    ] {
        let mut sum: f64 = modes.iter().map(|m| m.coef).sum();
        let last = modes.last().unwrap().n;
        let upto = 200_000;
        let mut t = 0.0;
        for n in (last + 1..=upto).rev() {
            t += tail.mode(n).coef;
        }
        sum += t + tail.remainder(upto);
        println!(
            "{:?}: Σ coefficients = {sum:.12} (want {want:.12}), tail part {:.3e}",
            tail.bc,
            t + tail.remainder(upto)
        );
        assert!((sum - want).abs() < 1e-9);
    }
}

#[test]
fn fully_developed_limits_and_decay_rates() {
    let p = circle(&[0.2, 0.25, 1.0, 2.0]);
    let nu_t = 2.7043644f64.powi(2) / 2.0; // Brown 1960: λ_0 = 2.7043644
    let nu_h = 48.0 / 11.0;
    println!(
        "x*=2: Nu_x,T = {:.10} (λ₀²/2 = {nu_t:.10}), Nu_x,H = {:.10} (48/11 = {nu_h:.10})",
        p[3].nu_t_local, p[3].nu_h_local
    );
    assert!(rel(p[3].nu_t_local, nu_t) < 1e-5 && rel(p[2].nu_t_local, nu_t) < 1e-5);
    assert!(rel(p[3].nu_h_local, nu_h) < 1e-5 && rel(p[2].nu_h_local, nu_h) < 1e-5);
    assert!((p[3].nu_t_local - 3.6568).abs() < 1e-4);
    // Mean values approach the local ones like 1/x*: Nu_m − Nu_∞ → ln(1/A_0)/(4x*) (T).
    let (a0, l0) = (series().t_numeric[0].coef, series().t_numeric[0].lambda);
    assert!(rel(p[3].nu_t_mean - l0 * l0 / 2.0, (1.0 / a0).ln() / 8.0) < 1e-9);
    // Decay rates of the transients.
    let (x1, x2) = (p[0].x_star, p[1].x_star);
    let exact_t = series().t_numeric[0].lambda.powi(2) / 2.0;
    let rate_t = -((p[1].nu_t_local - exact_t) / (p[0].nu_t_local - exact_t)).ln() / (x2 - x1);
    let want_t = 2.0 * (6.679031f64.powi(2) - 2.7043644f64.powi(2)); // Brown 1960
                                                                     // H: 11/48 − (Θ_w − Θ_b) = 11/48 − 1/Nu_x,H = Σ B_n e^{−2λ_n² x*} is a clean exponential.
    let tr = |q: &GraetzPoint| 11.0 / 48.0 - 1.0 / q.nu_h_local;
    let rate_h = -(tr(&p[1]) / tr(&p[0])).ln() / (x2 - x1);
    let want_h = 2.0 * 25.6796; // Siegel, Sparrow & Hallman 1958: λ_1² = 25.6796 (λ_1 = 5.0675)
    println!("decay of Nu_x,T − Nu_T: {rate_t:.6} vs 2(λ₁² − λ₀²) = {want_t:.6}");
    println!("decay of 11/48 − 1/Nu_x,H: {rate_h:.6} vs 2λ₁,H² = {want_h:.6}");
    assert!(rel(rate_t, want_t) < 1e-5);
    assert!(rel(rate_h, want_h) < 2e-6);
}

#[test]
fn mean_quadrature_reproduces_log_mean() {
    // The H mean uses ∫ Nu_x dx by Gauss–Legendre in x^{1/3}; the same code applied to
    // Nu_x,T must give the exact −ln θ_b/(4x*).
    let s = series();
    let st = [1e-6, 1e-5, 1e-4, 1e-3, 1e-2, 0.1, 1.0, 2.0];
    let i = s.integrate_nu(|x| s.nu_t_local(x), leveque_t(), &st);
    let mut worst = 0.0f64;
    for (x, i) in st.iter().zip(i) {
        let e = rel(i / x, s.nu_t_mean(*x));
        worst = worst.max(e);
        println!(
            "x* = {x:7.0e}: quadrature {:.12}  log-mean {:.12}  rel {e:.1e}",
            i / x,
            s.nu_t_mean(*x)
        );
    }
    assert!(worst < 1e-9);
}

#[test]
fn tail_independence() {
    // Series with 200 numerical modes (tail fitted on [100, 200]) against 400.
    let st = [1e-6, 3e-6, 1e-5, 1e-4];
    let a = Series::new(200).points(&st);
    let b = circle(&st);
    let mut worst = 0.0f64;
    for (p, q) in a.iter().zip(&b) {
        for (u, v) in [
            (p.nu_t_local, q.nu_t_local),
            (p.nu_t_mean, q.nu_t_mean),
            (p.nu_h_local, q.nu_h_local),
            (p.nu_h_mean, q.nu_h_mean),
        ] {
            worst = worst.max(rel(u, v));
        }
    }
    println!("200 vs 400 numerical modes: max relative difference {worst:.2e}");
    assert!(worst < 1e-8);
}

#[test]
fn march_agrees_with_series() {
    let st: Vec<f64> = [1e-6, 1e-5]
        .into_iter()
        .chain(table_stations().into_iter().filter(|&x| x > 1e-5))
        .chain([2.0])
        .collect();
    let s = circle(&st);
    let m1 = circle_march_extrapolated(&st, 400, 0.02);
    let m2 = circle_march_extrapolated(&st, 800, 0.01);
    println!(
        "relative differences: series − march(400, 0.02) [march(800, 0.01) − march(400, 0.02)]"
    );
    println!(
        "{:>8} {:>19} {:>19} {:>19} {:>19}",
        "x*", "Nu_x,T", "Nu_m,T", "Nu_x,H", "Nu_m,H"
    );
    let mut worst = 0.0f64;
    for ((p, a), b) in s.iter().zip(&m1).zip(&m2) {
        let d = |u: f64, v: f64, w: f64| format!("{:9.1e} [{:7.0e}]", u / v - 1.0, w / v - 1.0);
        println!(
            "{:8.0e} {} {} {} {}",
            p.x_star,
            d(p.nu_t_local, a.nu_t_local, b.nu_t_local),
            d(p.nu_t_mean, a.nu_t_mean, b.nu_t_mean),
            d(p.nu_h_local, a.nu_h_local, b.nu_h_local),
            d(p.nu_h_mean, a.nu_h_mean, b.nu_h_mean)
        );
        if p.x_star >= 1e-4 {
            for (u, v) in [
                (p.nu_t_local, a.nu_t_local),
                (p.nu_t_mean, a.nu_t_mean),
                (p.nu_h_local, a.nu_h_local),
                (p.nu_h_mean, a.nu_h_mean),
            ] {
                worst = worst.max(rel(u, v));
            }
        }
    }
    println!("worst at x* ≥ 1e-4: {worst:.2e}");
    assert!(worst < 1e-6);
}

#[test]
fn leveque_limit() {
    let s = series();
    // Shah & London 1978 (from memory): Nu_x,T ≈ 1.077 x*^{-1/3} − 0.7, Nu_x,H ≈ 1.302 x*^{-1/3} − 1.
    let x: f64 = 1e-6;
    let p = circle(&[x])[0];
    let lt = 1.077 * x.powf(-1.0 / 3.0) - 0.7;
    let lh = 1.302 * x.powf(-1.0 / 3.0) - 1.0;
    println!("x* = 1e-6: Nu_x,T = {:.5} (1.077x^-1/3 − 0.7 = {lt:.5}), Nu_x,H = {:.5} (1.302x^-1/3 − 1 = {lh:.5})", p.nu_t_local, p.nu_h_local);
    assert!(rel(p.nu_t_local, lt) < 0.01 && rel(p.nu_h_local, lh) < 0.01);
    // Leading coefficients: fit Nu·x^{1/3} = a + b x^{1/3} + c x^{2/3} + d x at x = 1e-9 … 5.12e-7.
    for (name, f, a_exact, mean) in [
        (
            "T local",
            &(|x: f64| s.nu_t_local(x)) as &dyn Fn(f64) -> f64,
            leveque_t(),
            false,
        ),
        ("H local", &|x: f64| s.nu_h_local(x), leveque_h(), false),
        ("T mean", &|x: f64| s.nu_t_mean(x), 1.5 * leveque_t(), true),
    ] {
        let xs = [1e-9, 8e-9, 6.4e-8, 5.12e-7];
        let rows: Vec<Vec<f64>> = xs
            .iter()
            .map(|x: &f64| vec![1.0, x.cbrt(), x.cbrt().powi(2), x.cbrt().powi(3)])
            .collect();
        let y: Vec<f64> = xs.iter().map(|&x| f(x) * x.cbrt()).collect();
        let c = lsq(&rows, &y);
        println!(
            "{name}: a = {:.7} (Lévêque {a_exact:.7}), b = {:.4}, c = {:.3}{}",
            c[0],
            c[1],
            c[2],
            if mean { "  [mean]" } else { "" }
        );
        assert!(rel(c[0], a_exact) < 1e-4);
    }
    // Coefficient of the Lévêque solution: 2/(Γ(4/3)·9^{1/3}) = 1.0767 ≈ 1.077.
    assert!((leveque_t() - 1.077).abs() < 5e-4 && (leveque_h() - 1.302).abs() < 5e-4);
}

#[test]
fn table() {
    let st = table_stations();
    let t = std::time::Instant::now();
    let p = circle(&st);
    let dt = t.elapsed();
    println!(
        "circle(): {} stations in {:.3} s (release, one core)",
        st.len(),
        dt.as_secs_f64()
    );
    println!(
        "{:>8} {:>12} {:>12} {:>12} {:>12}",
        "x*", "Nu_x,T", "Nu_m,T", "Nu_x,H", "Nu_m,H"
    );
    for q in &p {
        println!(
            "{:8.0e} {:12.6} {:12.6} {:12.6} {:12.6}",
            q.x_star, q.nu_t_local, q.nu_t_mean, q.nu_h_local, q.nu_h_mean
        );
        assert!(
            q.nu_t_local < q.nu_t_mean && q.nu_h_local < q.nu_h_mean && q.nu_t_local < q.nu_h_local
        );
    }
    let le = |a: f64, b: f64| a <= b * (1.0 + 1e-13);
    for w in p.windows(2) {
        assert!(le(w[1].nu_t_local, w[0].nu_t_local) && le(w[1].nu_h_local, w[0].nu_h_local));
        assert!(le(w[1].nu_t_mean, w[0].nu_t_mean) && le(w[1].nu_h_mean, w[0].nu_h_mean));
    }
}
