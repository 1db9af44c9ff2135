//! Independent reference for the thermal entrance (Graetz–Nusselt problem) of a
//! rectangular duct. Standard library only; shares no code with canalis.
//!
//! Problem (rectangle 0 < x < a, 0 < y < b, a = 1, b = alpha <= 1,
//! D = D_h = 4ab / (2(a + b))):
//! * velocity: -lap(u) = 1, u = 0 on the walls; w = u / mean(u);
//!   Fanning f·Re = D^2 / (2 mean(u)).
//! * energy, no axial conduction, x* = z / (D Re Pr):
//!   w dθ/dx* = D^2 lap(θ), θ = 1 at the inlet.
//!   - T condition: θ = 0 on the walls. θ_b = ∫wθ / ∫w,
//!     Nu_x,T = -(1/4) d ln θ_b / dx*, Nu_m,T = -ln θ_b / (4 x*).
//!   - H1 condition: Ψ = Θ - 4x*, w ∂Ψ/∂x* = D^2 lap(Ψ) - 4w, Ψ = Ψ_w(x*)
//!     uniform on the walls, ∫wΨ = 0 (this fixes Ψ_w);
//!     Nu_x,H1 = 1 / Ψ_w, Nu_m,H1 = (1/x*) ∫_0^x* Nu_x,H1.
//!
//! Method.
//! * Space: the quarter 0 < x < a/2, 0 < y < b/2 (zero-flux symmetry lines at
//!   x = a/2, y = b/2), uniform node-centred grid with nodes ON the walls
//!   (nx by ny cells), finite-volume 5-point Laplacian with half control volumes
//!   on the symmetry lines. Second order, symmetric: semi-discrete system
//!   M θ' = -D^2 K θ with M = diag(w_p A_p), K the (SPD) conductance matrix.
//!   The velocity is the discrete Poisson solution K u = A (same stencil).
//!   Nu_x,T is taken from the consistent discrete wall flux:
//!   Nu_x,T = D^2 c·θ / (4 m·θ) (c = wall conductances, m = w A), which is exactly
//!   -(1/4) d ln θ_b/dx* of the semi-discrete system.
//! * x*-march: BDF2 with variable step (L-stable at constant step; stable for
//!   step ratios < 1 + sqrt 2), started by one implicit Euler step. Steps are
//!   constant in blocks of `k` steps, doubled from block to block (ratio-2
//!   transition step), so only two banded Cholesky factorisations of
//!   (M + β h D^2 K) are needed per block. H1 is an index-2 DAE (Ψ_w is the
//!   multiplier of the constraint m·Ψ = 0); every step is solved with the
//!   constraint imposed exactly: Ψ = p + Ψ_w q, Ψ_w = -(m·p)/(m·q). BDF2 keeps
//!   its order for such systems.
//! * Linear algebra: banded Cholesky (bandwidth ny), written here.
//! * Nu_m,H1: trapezoidal rule over the steps from x* = 0, where the
//!   semi-discrete value is finite: Nu_H1(0) = D^2 Σc / (4 Σm).
//! * Values at the requested stations: cubic Lagrange interpolation in ln x*.
//! * Richardson extrapolation in the grid (errors ~ h^2 + h^4): three grids
//!   N, 2N, 4N per quarter side, v = (64 v_4N - 20 v_2N + v_N) / 45.
//!
//! Known fully developed values used as checks (Shah & London 1978, quoted from
//! memory): square Nu_T = 2.976, Nu_H1 = 3.608, f·Re = 14.227;
//! b/a = 0.5: Nu_T = 3.391, Nu_H1 = 4.123, f·Re = 15.548.

#![allow(dead_code)]

#[derive(Clone, Copy, Debug)]
pub struct RectPoint {
    pub x_star: f64,
    pub nu_t_local: f64,
    pub nu_t_mean: f64,
    pub nu_h_local: f64,
    pub nu_h_mean: f64,
}

/// Coarsest grid (cells per quarter side along a) of the three used.
pub const N_COARSE: usize = 24;
/// Steps per block of constant step (step doubled from block to block).
pub const K_STEPS: usize = 32;
/// First step of the march.
pub const H0: f64 = 1e-9;
/// Largest step (the fully developed decay exp(-4 Nu x*) must stay resolved).
pub const H_MAX: f64 = 4e-3;

/// Reference result: three-grid Richardson extrapolation.
///
/// Nu_m,H1 of a single grid converges slowly near the inlet (~h^1.4 at
/// x* = 1e-4: the unresolved start x* < O(h^3) enters the integral), so it is
/// rebuilt from the extrapolated LOCAL values, which converge as h^2:
/// Nu_m,H1(x*) = (1/x*) [I_a + ∫_{x_a}^{x*} Nu_x,H1 dx*], trapezoidal rule in
/// ln x* (64 points per decade), with the start I_a = ∫_0^{x_a} taken from the
/// Lévêque-type form Nu_x = A x*^(-1/3) + B fitted at x_a and 2 x_a.
/// The same construction applied to T is compared with the direct
/// -ln θ_b / (4x*) in the self-checks.
pub fn rectangle(aspect: f64, stations: &[f64]) -> Vec<RectPoint> {
    rectangle_detail(aspect, stations).0
}

/// Start of the integrated means.
pub const X_A: f64 = 2e-5;

/// Returns the reference points and, for validation, Nu_m,T rebuilt from the
/// local values by the same integration as Nu_m,H1.
pub fn rectangle_detail(aspect: f64, stations: &[f64]) -> (Vec<RectPoint>, Vec<f64>) {
    let xmax = stations.iter().cloned().fold(0.0, f64::max);
    let per_dec = 64.0;
    let nd = ((xmax / X_A).log10() * per_dec).ceil() as usize + 2;
    let du = (xmax / X_A).ln() / (nd - 2) as f64;
    let dense: Vec<f64> = (0..=nd).map(|i| X_A * (i as f64 * du).exp()).collect();
    let mut all = dense.clone();
    all.extend_from_slice(stations);
    let g = grids(aspect, &all, N_COARSE, K_STEPS);
    let r = richardson3(&g[0].1, &g[1].1, &g[2].1);
    let (rd, rs) = r.split_at(dense.len());
    let mean = |f: fn(&RectPoint) -> f64| -> Vec<f64> {
        let (n1, n2) = (f(&rd[0]), f(&interp_pt(rd, 2.0 * X_A, f)));
        let a = (n1 - n2) / (X_A.powf(-1.0 / 3.0) - (2.0 * X_A).powf(-1.0 / 3.0));
        let b = n1 - a * X_A.powf(-1.0 / 3.0);
        let mut cum = vec![1.5 * a * X_A.powf(2.0 / 3.0) + b * X_A];
        for i in 1..rd.len() {
            let c = cum[i - 1] + 0.5 * du * (f(&rd[i - 1]) * dense[i - 1] + f(&rd[i]) * dense[i]);
            cum.push(c);
        }
        let h: Vec<[f64; 5]> = dense
            .iter()
            .zip(&cum)
            .map(|(x, c)| [*x, *c, 0.0, 0.0, 0.0])
            .collect();
        stations
            .iter()
            .map(|&s| interp(&h, s).nu_t_local / s)
            .collect()
    };
    let mh = mean(|p| p.nu_h_local);
    let mt = mean(|p| p.nu_t_local);
    let mut out = rs.to_vec();
    for (p, m) in out.iter_mut().zip(mh) {
        p.nu_h_mean = m;
    }
    (out, mt)
}

fn interp_pt(pts: &[RectPoint], s: f64, f: fn(&RectPoint) -> f64) -> RectPoint {
    let h: Vec<[f64; 5]> = pts
        .iter()
        .map(|p| [p.x_star, f(p), 0.0, 0.0, 0.0])
        .collect();
    let v = interp(&h, s).nu_t_local;
    RectPoint {
        x_star: s,
        nu_t_local: v,
        nu_t_mean: v,
        nu_h_local: v,
        nu_h_mean: v,
    }
}

/// Runs the three grids n0, 2 n0, 4 n0 (in parallel); returns (f·Re, points) per grid.
pub fn grids(aspect: f64, stations: &[f64], n0: usize, k: usize) -> Vec<(f64, Vec<RectPoint>)> {
    std::thread::scope(|s| {
        let hs: Vec<_> = [4usize, 2, 1]
            .iter()
            .map(|&f| {
                s.spawn(move || solve_grid(aspect, n0 * f, ny_for(aspect, n0) * f, k, stations))
            })
            .collect();
        let mut v: Vec<_> = hs.into_iter().map(|h| h.join().unwrap()).collect();
        v.reverse();
        v
    })
}

fn ny_for(aspect: f64, n0: usize) -> usize {
    ((n0 as f64 * aspect).round() as usize).max(1)
}

pub fn richardson2(c: &[RectPoint], f: &[RectPoint]) -> Vec<RectPoint> {
    comb(&[c, f], &[-1.0 / 3.0, 4.0 / 3.0])
}

pub fn richardson3(c: &[RectPoint], m: &[RectPoint], f: &[RectPoint]) -> Vec<RectPoint> {
    comb(&[c, m, f], &[1.0 / 45.0, -20.0 / 45.0, 64.0 / 45.0])
}

fn comb(v: &[&[RectPoint]], w: &[f64]) -> Vec<RectPoint> {
    (0..v[0].len())
        .map(|i| {
            let s =
                |g: fn(&RectPoint) -> f64| v.iter().zip(w).map(|(p, c)| c * g(&p[i])).sum::<f64>();
            RectPoint {
                x_star: v[0][i].x_star,
                nu_t_local: s(|p| p.nu_t_local),
                nu_t_mean: s(|p| p.nu_t_mean),
                nu_h_local: s(|p| p.nu_h_local),
                nu_h_mean: s(|p| p.nu_h_mean),
            }
        })
        .collect()
}

/// Discretisation of the quarter domain.
struct Grid {
    nx: usize,
    ny: usize,
    n: usize,
    gx: Vec<f64>, // conductance to the node at i-1 (wall when i = 1)
    gy: Vec<f64>, // conductance to the node at j-1 (wall when j = 1)
    c: Vec<f64>,  // wall conductance of each node
    area: Vec<f64>,
}

impl Grid {
    fn new(aspect: f64, nx: usize, ny: usize) -> Grid {
        let hx = 0.5 / nx as f64;
        let hy = 0.5 * aspect / ny as f64;
        let n = nx * ny;
        let (mut gx, mut gy, mut c, mut area) =
            (vec![0.0; n], vec![0.0; n], vec![0.0; n], vec![0.0; n]);
        for i in 1..=nx {
            let cx = if i == nx { 0.5 * hx } else { hx };
            for j in 1..=ny {
                let cy = if j == ny { 0.5 * hy } else { hy };
                let p = (i - 1) * ny + (j - 1);
                gx[p] = cy / hx;
                gy[p] = cx / hy;
                area[p] = cx * cy;
                c[p] = if i == 1 { gx[p] } else { 0.0 } + if j == 1 { gy[p] } else { 0.0 };
            }
        }
        Grid {
            nx,
            ny,
            n,
            gx,
            gy,
            c,
            area,
        }
    }

    /// Banded Cholesky factor of diag(d) + s K.
    fn factor(&self, d: &[f64], s: f64) -> Band {
        let (n, bw) = (self.n, self.ny);
        let mut a = vec![0.0; n * (bw + 1)];
        for p in 0..n {
            let (i, j) = (p / bw + 1, p % bw + 1);
            let mut kd = self.gx[p] + self.gy[p];
            if i < self.nx {
                kd += self.gx[p + bw];
            }
            if j < self.ny {
                kd += self.gy[p + 1];
            }
            a[p * (bw + 1) + bw] = d[p] + s * kd;
            if j > 1 {
                a[p * (bw + 1) + bw - 1] = -s * self.gy[p];
            }
            if i > 1 {
                a[p * (bw + 1)] = -s * self.gx[p];
            }
        }
        Band::cholesky(a, n, bw)
    }
}

/// Lower band of L, row p holds columns p-bw ..= p.
struct Band {
    l: Vec<f64>,
    n: usize,
    bw: usize,
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    let mut s = [0.0f64; 4];
    let (ca, cb) = (a.chunks_exact(4), b.chunks_exact(4));
    let (ra, rb) = (ca.remainder(), cb.remainder());
    for (x, y) in ca.zip(cb) {
        s[0] += x[0] * y[0];
        s[1] += x[1] * y[1];
        s[2] += x[2] * y[2];
        s[3] += x[3] * y[3];
    }
    let mut t = (s[0] + s[1]) + (s[2] + s[3]);
    for (x, y) in ra.iter().zip(rb) {
        t += x * y;
    }
    t
}

impl Band {
    fn cholesky(mut l: Vec<f64>, n: usize, bw: usize) -> Band {
        let w = bw + 1;
        for p in 0..n {
            for k in (1..=bw).rev() {
                if k > p {
                    continue;
                }
                let q = p - k;
                let s = dot(&l[p * w..p * w + bw - k], &l[q * w + k..q * w + bw]);
                l[p * w + bw - k] = (l[p * w + bw - k] - s) / l[q * w + bw];
            }
            let s = dot(&l[p * w..p * w + bw], &l[p * w..p * w + bw]);
            let d = l[p * w + bw] - s;
            assert!(d > 0.0, "matrix not SPD");
            l[p * w + bw] = d.sqrt();
        }
        Band { l, n, bw }
    }

    fn solve(&self, b: &[f64]) -> Vec<f64> {
        let (n, bw, w) = (self.n, self.bw, self.bw + 1);
        let mut y = b.to_vec();
        for p in 0..n {
            let lo = p.saturating_sub(bw);
            let s = dot(&self.l[p * w + bw - (p - lo)..p * w + bw], &y[lo..p]);
            y[p] = (y[p] - s) / self.l[p * w + bw];
        }
        for p in (0..n).rev() {
            y[p] /= self.l[p * w + bw];
            let xp = y[p];
            let lo = p.saturating_sub(bw);
            let row = &self.l[p * w + bw - (p - lo)..p * w + bw];
            for (yr, lr) in y[lo..p].iter_mut().zip(row) {
                *yr -= lr * xp;
            }
        }
        y
    }
}

/// One grid: returns (f·Re, values at the stations).
pub fn solve_grid(
    aspect: f64,
    nx: usize,
    ny: usize,
    k: usize,
    stations: &[f64],
) -> (f64, Vec<RectPoint>) {
    let (a, b) = (1.0, aspect);
    let d = 4.0 * a * b / (2.0 * (a + b));
    let d2 = d * d;
    let g = Grid::new(aspect, nx, ny);
    let n = g.n;
    // Velocity: K u = A.
    let u = g.factor(&vec![0.0; n], 1.0).solve(&g.area);
    let umean = dot(&u, &g.area) / (0.25 * a * b);
    let f_re = d2 / (2.0 * umean);
    let m: Vec<f64> = u
        .iter()
        .zip(&g.area)
        .map(|(u, ar)| u / umean * ar)
        .collect();
    let s_m: f64 = m.iter().sum();
    let c_sum: f64 = g.c.iter().sum();

    let x_end = stations.iter().cloned().fold(0.0, f64::max) * 1.5;
    let mut th = vec![1.0; n];
    let mut th_old = th.clone();
    let mut ps = vec![0.0; n];
    let mut ps_old = ps.clone();
    let mut x = 0.0;
    let mut nuh_prev = d2 * c_sum / (4.0 * s_m);
    let mut integral = 0.0;
    let mut hist: Vec<[f64; 5]> = Vec::new();
    let mut h = H0;
    let mut h_last = H0;
    let mut block = 0;
    'outer: loop {
        // (a1, a2, beta) for the first step of the block, then constant-step BDF2.
        let first = if block == 0 {
            (1.0, 0.0, 1.0)
        } else {
            let om: f64 = h / h_last;
            let den = 1.0 + 2.0 * om;
            ((1.0 + om).powi(2) / den, om * om / den, (1.0 + om) / den)
        };
        let rest = (4.0 / 3.0, 1.0 / 3.0, 2.0 / 3.0);
        for (coef, nsteps) in [(first, 1), (rest, k - 1)] {
            let (a1, a2, beta) = coef;
            let bh = beta * h;
            let f = g.factor(&m, bh * d2);
            let q = f.solve(&g.c.iter().map(|c| bh * d2 * c).collect::<Vec<_>>());
            let sm = f.solve(&m);
            let mq = dot(&m, &q);
            for _ in 0..nsteps {
                let rt: Vec<f64> = (0..n)
                    .map(|p| m[p] * (a1 * th[p] - a2 * th_old[p]))
                    .collect();
                let tn = f.solve(&rt);
                let rp: Vec<f64> = (0..n)
                    .map(|p| m[p] * (a1 * ps[p] - a2 * ps_old[p]))
                    .collect();
                let mut pn = f.solve(&rp);
                for (p, s) in pn.iter_mut().zip(&sm) {
                    *p -= 4.0 * bh * s;
                }
                let psi_w = -dot(&m, &pn) / mq;
                for (p, qq) in pn.iter_mut().zip(&q) {
                    *p += psi_w * qq;
                }
                th_old = std::mem::replace(&mut th, tn);
                ps_old = std::mem::replace(&mut ps, pn);
                x += h;
                let mt = dot(&m, &th);
                let nut_x = d2 * dot(&g.c, &th) / (4.0 * mt);
                let nut_m = -(mt / s_m).ln() / (4.0 * x);
                let nuh_x = 1.0 / psi_w;
                integral += 0.5 * h * (nuh_prev + nuh_x);
                nuh_prev = nuh_x;
                hist.push([x, nut_x, nut_m, nuh_x, integral / x]);
                if x > x_end && hist.len() > 4 {
                    break 'outer;
                }
            }
        }
        h_last = h;
        if h < H_MAX {
            h *= 2.0;
            block += 1;
        }
    }
    let pts = stations.iter().map(|&s| interp(&hist, s)).collect();
    (f_re, pts)
}

fn interp(hist: &[[f64; 5]], s: f64) -> RectPoint {
    let i = hist.partition_point(|r| r[0] < s).clamp(2, hist.len() - 2);
    let idx = [i - 2, i - 1, i, i + 1];
    let ls = s.ln();
    let lx: Vec<f64> = idx.iter().map(|&j| hist[j][0].ln()).collect();
    let mut out = [0.0; 5];
    for (a, &ja) in idx.iter().enumerate() {
        let mut wgt = 1.0;
        for bb in 0..4 {
            if bb != a {
                wgt *= (ls - lx[bb]) / (lx[a] - lx[bb]);
            }
        }
        for c in 1..5 {
            out[c] += wgt * hist[ja][c];
        }
    }
    RectPoint {
        x_star: s,
        nu_t_local: out[1],
        nu_t_mean: out[2],
        nu_h_local: out[3],
        nu_h_mean: out[4],
    }
}
