//! Solver benchmark: `cargo bench --bench solver` (or `cargo bench`).
//!
//! For each shape (circle, annulus, four-fin finned tube, L-shaped mask) and each size (128 to
//! 4096 cells across), runs one solve in a child process (so that its peak memory is its own)
//! and prints unknowns, iterations, assembly, setup, solve and total seconds (assembly + setup +
//! solve, the grid classification included in assembly), post-processing seconds, heat-transfer
//! seconds (0 unless `CANALIS_BENCH_HEAT=1`) and peak memory in bytes per unknown. Then fits the
//! exponent of total time against unknowns from 256 to 2048 cells. Options: `--sizes 128,256`, `--shapes circle,annulus`, `--repeat N` (median of N
//! runs, default 3), `--method multigrid|jacobi`.
//!
//! `--calls` instead times the kernels one call at a time, in this process on a pool worker:
//! for each shape and size, the grid classification, the operator, the multigrid setup, one
//! V-cycle and one operator application (with p·Ap), medians of `--repeat N` calls (default
//! 20, after 3 warm-up calls), in milliseconds. With `RAYON_NUM_THREADS=1` this is the
//! single-core cost.

use canalis::geometry::builtin::parse_builtin;
use canalis::geometry::mask::Mask;
use canalis::geometry::Domain;
use canalis::grid::Grid;
use canalis::pipeline::{solve_unit, Method, UnitOptions};
use canalis::post::WallKind;
use std::process::Command;

const SHAPES: [&str; 4] = ["circle", "annulus", "finned", "lmask"];
const SIZES: [usize; 6] = [128, 256, 512, 1024, 2048, 4096];

fn peak_rss_bytes() -> u64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines().find(|l| l.starts_with("VmHWM:")).and_then(|l| {
                l.split_whitespace()
                    .nth(1)
                    .and_then(|v| v.parse::<u64>().ok())
            })
        })
        .map(|kib| kib * 1024)
        .unwrap_or(0)
}

/// One solve in this process; prints one line of numbers.
fn child(shape: &str, cells: usize, method: Method) {
    // The flow problem of issue 3 (heat transfer is timed on its own, `heat s`).
    let opts = UnitOptions {
        method,
        heat: std::env::var("CANALIS_BENCH_HEAT").is_ok(),
        ..Default::default()
    };
    let (domain, grid, walls) = domain_of(shape, cells);
    let sol = solve_unit(domain.as_ref(), grid, walls, &opts).expect("solve");
    let t = sol.seconds;
    let per_pass: Vec<String> = sol
        .passes
        .iter()
        .map(|p| p.iterations.to_string())
        .collect();
    eprintln!("passes {}", per_pass.join("+"));
    println!(
        "{} {} {:.6} {:.6} {:.6} {:.6} {:.6} {} {:.9} {:.6}",
        sol.numbering.len(),
        sol.info.iterations,
        t.grid + t.assembly,
        t.setup,
        t.solve,
        t.post,
        sol.figures.fanning_f_re,
        peak_rss_bytes(),
        sol.info.relative_residual,
        t.heat
    );
}

/// The domain and grid of a benchmark shape (see [`child`]).
fn domain_of(shape: &str, cells: usize) -> (Box<dyn Domain>, Grid, WallKind) {
    match shape {
        "lmask" => {
            let n = cells;
            let (mask, _) = Mask::from_fn(n, n, 1e-3 / n as f64, |c, r| {
                let border = c < 2 || r < 2 || c + 2 >= n || r + 2 >= n;
                let cut = c >= n / 2 && r < n / 2;
                !border && !cut
            })
            .expect("mask");
            let g = Grid::from_lattice(mask.lattice().expect("lattice"));
            (Box::new(mask), g, WallKind::Staircase)
        }
        name => {
            let spec = match name {
                "circle" => "circle:d=10mm",
                "annulus" => "annulus:do=20mm,di=10mm,offset=2mm",
                _ => "finned:d=16mm,fins=4,height=3mm,thickness=1mm",
            };
            let s = parse_builtin(spec).expect("shape");
            let (lo, hi) = s.bbox();
            (Box::new(s), Grid::covering(lo, hi, cells), WallKind::Exact)
        }
    }
}

/// Per-call kernel timings (`--calls`), milliseconds.
fn calls(shapes: &[String], sizes: &[usize], repeat: usize) {
    use canalis::grid::classify;
    use canalis::multigrid::Multigrid;
    use canalis::operator::GridOperator;
    use canalis::solver::{LinearOperator, Preconditioner};
    use std::time::Instant;
    let ms = |t: Instant| t.elapsed().as_secs_f64() * 1e3;
    println!(
        "| shape | cells | grid nodes | classify ms | operator ms | setup ms | V-cycle ms | A·p with p·Ap ms |"
    );
    println!("|---|---|---|---|---|---|---|---|");
    for shape in shapes {
        for &cells in sizes {
            let (domain, grid, _) = domain_of(shape, cells);
            let t = Instant::now();
            let c = classify(domain.as_ref(), grid).expect("classify");
            let t_class = ms(t);
            let t = Instant::now();
            let a = GridOperator::new(
                &canalis::problem::Problem::laplace(&c),
                &canalis::problem::Numbering::new(&c),
            );
            let t_op = ms(t);
            let t = Instant::now();
            let mg = Multigrid::new(a).expect("multigrid setup");
            let a = mg.operator();
            let t_setup = ms(t);
            let r: Vec<f64> = a
                .diag
                .iter()
                .map(|&d| if d != 0.0 { 1.0 } else { 0.0 })
                .collect();
            let (mut z, mut q) = (vec![0.0; r.len()], vec![0.0; r.len()]);
            let time = |f: &mut dyn FnMut()| {
                for _ in 0..3 {
                    f();
                }
                let mut v: Vec<f64> = (0..repeat.max(1))
                    .map(|_| {
                        let t = Instant::now();
                        f();
                        ms(t)
                    })
                    .collect();
                median(&mut v)
            };
            let t_v = time(&mut || {
                std::hint::black_box(mg.apply_dot(&r, &mut z));
            });
            let t_a = time(&mut || {
                std::hint::black_box(a.apply_dot(&z, &mut q));
            });
            println!(
                "| {shape} | {cells} | {} | {t_class:.1} | {t_op:.1} | {t_setup:.1} | {t_v:.2} | {t_a:.2} |",
                r.len()
            );
        }
    }
}

fn median(v: &mut [f64]) -> f64 {
    v.sort_by(|a, b| a.total_cmp(b));
    v[v.len() / 2]
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let get = |key: &str| {
        args.iter()
            .position(|a| a == key)
            .and_then(|i| args.get(i + 1).cloned())
    };
    let method = match get("--method").as_deref() {
        Some("jacobi") => Method::Jacobi,
        _ => Method::Multigrid,
    };
    if let (Some(shape), Some(cells)) = (get("--child-shape"), get("--child-cells")) {
        // (solve_unit runs itself on a worker of the pool, as in the binary.)
        child(&shape, cells.parse().expect("cells"), method);
        return;
    }
    let sizes: Vec<usize> = get("--sizes")
        .map(|s| s.split(',').filter_map(|v| v.parse().ok()).collect())
        .unwrap_or_else(|| SIZES.to_vec());
    let shapes: Vec<String> = get("--shapes")
        .map(|s| s.split(',').map(str::to_string).collect())
        .unwrap_or_else(|| SHAPES.iter().map(|s| s.to_string()).collect());
    if args.iter().any(|a| a == "--calls") {
        let repeat: usize = get("--repeat").and_then(|v| v.parse().ok()).unwrap_or(20);
        // The kernels are called directly here, so from a worker as solve_unit calls them.
        rayon::scope(|_| calls(&shapes, &sizes, repeat));
        return;
    }
    let repeat: usize = get("--repeat").and_then(|v| v.parse().ok()).unwrap_or(3);
    let exe = std::env::current_exe().expect("own path");
    println!(
        "| shape | cells | unknowns | iterations (per solve) | assembly s | setup s | solve s | total s | post s | heat s | peak B/unknown | f·Re |"
    );
    println!("|---|---|---|---|---|---|---|---|---|---|---|---|");
    for shape in &shapes {
        let mut fit: Vec<(f64, f64)> = Vec::new();
        for &cells in &sizes {
            let mut cols: Vec<Vec<f64>> = vec![Vec::new(); 10];
            let mut iters = 0;
            let mut passes = String::new();
            let mut unknowns = 0;
            let mut fre = 0.0;
            for _ in 0..repeat.max(1) {
                let out = Command::new(&exe)
                    .args([
                        "--child-shape",
                        shape,
                        "--child-cells",
                        &cells.to_string(),
                        "--method",
                        if method == Method::Jacobi {
                            "jacobi"
                        } else {
                            "multigrid"
                        },
                        "--bench",
                    ])
                    .output()
                    .expect("child");
                let text = String::from_utf8_lossy(&out.stdout);
                let err = String::from_utf8_lossy(&out.stderr);
                passes = err
                    .lines()
                    .find_map(|l| l.strip_prefix("passes ").map(str::to_string))
                    .unwrap_or_default();
                let line = text.lines().last().unwrap_or("");
                let v: Vec<f64> = line
                    .split_whitespace()
                    .filter_map(|x| x.parse().ok())
                    .collect();
                if v.len() < 10 {
                    eprintln!(
                        "{shape} {cells}: child failed: {}",
                        String::from_utf8_lossy(&out.stderr)
                    );
                    break;
                }
                unknowns = v[0] as usize;
                iters = v[1] as usize;
                fre = v[6];
                for (c, x) in cols.iter_mut().zip(&v) {
                    c.push(*x);
                }
            }
            if cols[2].is_empty() {
                continue;
            }
            let asm = median(&mut cols[2]);
            let setup = median(&mut cols[3]);
            let solve = median(&mut cols[4]);
            let post = median(&mut cols[5]);
            let total = {
                let mut t: Vec<f64> = (0..cols[2].len())
                    .map(|i| cols[2][i] + cols[3][i] + cols[4][i])
                    .collect();
                median(&mut t)
            };
            let peak = median(&mut cols[7]);
            let heat = median(&mut cols[9]);
            println!(
                "| {shape} | {cells} | {unknowns} | {iters} ({passes}) | {asm:.4} | {setup:.4} | {solve:.4} | {total:.4} | {post:.4} | {heat:.4} | {:.0} | {fre:.6} |",
                peak / unknowns as f64
            );
            if (256..=2048).contains(&cells) {
                fit.push(((unknowns as f64).ln(), total.ln()));
            }
        }
        if fit.len() >= 2 {
            let n = fit.len() as f64;
            let (sx, sy) = fit.iter().fold((0.0, 0.0), |a, p| (a.0 + p.0, a.1 + p.1));
            let (mx, my) = (sx / n, sy / n);
            let num: f64 = fit.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
            let den: f64 = fit.iter().map(|p| (p.0 - mx).powi(2)).sum();
            println!(
                "| {shape} | fitted exponent of total time vs unknowns, 256–2048 cells: {:.3} |",
                num / den
            );
        }
    }
}
