//! The numerical uncertainty of the thermal entrance values (`--entrance`, issue 16): the
//! march's step error and its grid error, each from a pair of marches that differ in that one
//! respect, combined per station and quantity.
//!
//! Owns: the arithmetic that turns three marches into relative error bars ([`parts`]), the
//! split into a grid part and a step part ([`Parts`]), and the stations `--accuracy` applies
//! to ([`ACCURACY_FROM`]).
//!
//! # The estimate
//! With v the fine march's value at a station (grid spacing h, step sequence S: the base
//! sequence split `halvings` times, [`crate::entrance::MarchParams`]):
//!
//! - **Step error**: the march on the same grid with the sequence of one halving less, v_S2,
//!   whose every step is exactly twice as long in ln x* (each of its steps is two of S). The
//!   difference is the step error alone (same grid, same operator); with the order p_s = 3 of
//!   the three-stage SDIRK (Alexander 1977, from memory) and the safety factor 3 of a two-level
//!   estimate with an assumed order (Roache 1994),
//!   U_step = 3·|v − v_S2| / ((2^p_s − 1)·|v|).
//!   Measured on the round tube at 300 cells: the step errors of 4, 8, 16 and 32 steps per
//!   decade fall by 6.5–9 per halving (observed order 2.7–3.2), so 2³ is about right and the
//!   factor 3 covers the lower observed orders.
//! - **Grid error**: the march on a coarser grid (spacing r·h) with the same step sequence
//!   v_H; the difference is the grid error alone (the same steps), and with the formal order
//!   2 of the cut-cell scheme, U_grid = 3·|v − v_H| / ((r² − 1)·|v|), as the cheap estimate
//!   of the fully developed figures ([`crate::study`]).
//! - **Thin-layer limit**: below the x* where the thermal layer spans fewer than four cells,
//!   the march's local values are replaced by the Lévêque limit (`entrance::Leveque`) on
//!   every grid, so the pairs above see no error there. The limit's error falls like x*^(1/3)
//!   (the next term of the expansion is a constant next to the x*^(−1/3) of the limit); its
//!   relative gap g to the march at the first resolved point x_r gives, below x_r, the grid
//!   part 3·g·(x*/x_r)^(1/3) (grid, because a finer grid moves x_r towards the inlet).
//! - **Means**: a mean over 0..x* averages the local values upstream, and the errors of those
//!   add up with the weights of the mean. Each part of a mean's uncertainty is at least the
//!   average of that part of the local uncertainties upstream, weighted as the mean weighs
//!   the local values (∫Nu_x dx* between stations, from the means themselves: the integral
//!   from x_(i−1) to x_i is Nu_m,i·x_i − Nu_m,(i−1)·x_(i−1)), with the larger of the two
//!   stations' values over each interval, and the first station's over 0..x₁. Measured on the
//!   round tube: the H1 mean at x* = 1e-4 was 2.0e-3 off where the two grids' means differed by
//!   1e-4 only (the errors near the inlet change sign between grids).
//!
//! The reported relative uncertainty is U_grid + U_step (each bounds its own part; their sum
//! bounds the error whatever the signs).
//!
//! Invariant: solves nothing (the marches are run by `pipeline`); no report formatting.

use crate::entrance::ThermalEntrance;

/// Order of the march in its step: the three-stage SDIRK of [`crate::entrance`] is of order 3.
pub const STEP_ORDER: f64 = 3.0;
/// Ratio of the step lengths (in ln x*) of two marches one halving apart.
pub const STEP_RATIO: f64 = 2.0;
/// Formal order of the cut-cell scheme in the grid spacing.
pub const GRID_ORDER: f64 = 2.0;
/// Safety factor of every two-level estimate with an assumed order (Roache 1994).
pub const SAFETY: f64 = 3.0;
/// `--accuracy TOL` applies to the entrance values from this x* on: the lower end of the
/// range with the stated accuracy (1 % from 1e-4, 0.3 % from 1e-3). Closer to the
/// inlet the thermal layer is a few cells thick on any affordable grid (at 300 cells across a
/// round tube it is four cells thick at x* = 2e-6, and a tenfold smaller x* needs about twice
/// the cells for the same relative resolution); those stations keep their estimate, and a
/// warning says when it is above the target.
pub const ACCURACY_FROM: f64 = 1e-4;

/// Relative uncertainty per passage, quantity (Nu_x,T, Nu_m,T, Nu_x,H1, Nu_m,H1 in that order)
/// and station.
pub type Bars = Vec<[Vec<f64>; 4]>;

/// The two parts of the entrance values' uncertainty.
#[derive(Debug, Clone, PartialEq)]
pub struct Parts {
    /// From the grid pair and the thin-layer limit.
    pub grid: Bars,
    /// From the step pair.
    pub step: Bars,
}

/// The largest parts over the stations from a given x* on, every passage and quantity.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Worst {
    pub grid: f64,
    pub step: f64,
    pub total: f64,
}

impl Parts {
    /// U_grid + U_step per passage, quantity and station.
    pub fn total(&self) -> Bars {
        self.grid
            .iter()
            .zip(&self.step)
            .map(|(g, s)| {
                std::array::from_fn(|k| g[k].iter().zip(&s[k]).map(|(a, b)| a + b).collect())
            })
            .collect()
    }

    /// The largest of each part (and of their sum) at the stations of `x_star` from `from`
    /// on (not-a-number counts as infinite: no estimate is no bound).
    pub fn worst_from(&self, x_star: &[f64], from: f64) -> Worst {
        let total = self.total();
        let worst = |bars: &Bars| {
            let mut w = 0.0f64;
            for q in bars {
                for v in q {
                    for (x, u) in x_star.iter().zip(v) {
                        if *x >= from * (1.0 - 1e-9) {
                            w = w.max(if u.is_nan() { f64::INFINITY } else { *u });
                        }
                    }
                }
            }
            w
        };
        Worst {
            grid: worst(&self.grid),
            step: worst(&self.step),
            total: worst(&total),
        }
    }
}

/// The four values of a passage at the stations, in the order of [`Bars`].
fn values(e: &ThermalEntrance, p: usize) -> [&[f64]; 4] {
    let q = &e.passages[p];
    [
        &q.nusselt_t_local,
        &q.nusselt_t_mean,
        &q.nusselt_h1_local,
        &q.nusselt_h1_mean,
    ]
}

/// factor·|a − b|/|a|, infinite when either is not finite.
fn relative(factor: f64, a: f64, b: f64) -> f64 {
    let r = factor * (a - b).abs() / a.abs();
    if r.is_finite() {
        r
    } else {
        f64::INFINITY
    }
}

/// The uncertainty parts of `fine` (see the module documentation) from `steps` (the same grid,
/// one halving less) and `coarse` (a grid `grid_ratio` times coarser, the same steps). The
/// three must have the same stations and passages.
pub fn parts(
    fine: &ThermalEntrance,
    steps: &ThermalEntrance,
    coarse: &ThermalEntrance,
    grid_ratio: f64,
) -> Parts {
    let step_factor = SAFETY / (STEP_RATIO.powf(STEP_ORDER) - 1.0);
    let grid_factor = SAFETY / (grid_ratio.powf(GRID_ORDER) - 1.0);
    let x = &fine.x_star;
    let pair = |other: &ThermalEntrance, p: usize, factor: f64| -> [Vec<f64>; 4] {
        let (f, o) = (values(fine, p), values(other, p));
        std::array::from_fn(|k| {
            f[k].iter()
                .zip(o[k])
                .map(|(&a, &b)| relative(factor, a, b))
                .collect()
        })
    };
    let mut grid = Vec::new();
    let mut step = Vec::new();
    for p in 0..fine.passages.len() {
        let mut g = pair(coarse, p, grid_factor);
        let mut s = pair(steps, p, step_factor);
        // The thin-layer limit below the first resolved march point.
        let pe = &fine.passages[p];
        let lev = pe.leveque;
        if let Some(r) = pe.curve.iter().find(|c| c[0] >= lev.resolved_from) {
            let gap_t = relative(1.0, r[1], lev.nusselt_t(r[0]));
            let gap_h = relative(1.0, r[2], lev.nusselt_h1(r[0]));
            for (i, &xi) in x.iter().enumerate() {
                if xi < lev.resolved_from {
                    let scale = SAFETY * (xi / r[0]).cbrt();
                    g[0][i] += scale * gap_t;
                    g[2][i] += scale * gap_h;
                }
            }
        }
        // Means: at least the weighted upstream average of the local part.
        let f = values(fine, p);
        for (local, mean) in [(0, 1), (2, 3)] {
            for part in [&mut g, &mut s] {
                let upstream = upstream_average(x, &part[local], f[mean]);
                for (m, u) in part[mean].iter_mut().zip(upstream) {
                    *m = m.max(u);
                }
            }
        }
        grid.push(g);
        step.push(s);
    }
    Parts { grid, step }
}

/// Σ over the intervals up to each station of max(U_(i−1), U_i)·∫Nu_x dx*, over ∫₀^x* Nu_x dx*,
/// with ∫ from x_(i−1) to x_i of Nu_x = M_i·x_i − M_(i−1)·x_(i−1) from the means M (the first
/// interval from the inlet, with U of the first station).
fn upstream_average(x: &[f64], local: &[f64], means: &[f64]) -> Vec<f64> {
    let mut sum = 0.0;
    let mut previous: Option<(f64, f64)> = None; // (U, M·x) at the last station
    x.iter()
        .zip(local)
        .zip(means)
        .map(|((&xi, &u), &m)| {
            let integral = m * xi;
            sum += match previous {
                None => u * integral,
                Some((up, ip)) => u.max(up) * (integral - ip),
            };
            previous = Some((u, integral));
            let avg = sum / integral;
            if avg.is_finite() {
                avg
            } else {
                f64::INFINITY
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn upstream_average_weighs_by_the_mean() {
        // Nu_x = x^(−1/3): M = 1.5·x^(−1/3), ∫₀^x Nu = 1.5·x^(2/3). A constant U averages
        // to itself; a step from 0 to U at the second station weighs U by the share of the
        // integral beyond the first station.
        let x = [1.0, 8.0, 27.0];
        let m: Vec<f64> = x.iter().map(|&v: &f64| 1.5 / v.cbrt()).collect();
        let avg = upstream_average(&x, &[0.1, 0.1, 0.1], &m);
        for a in &avg {
            assert!((a - 0.1).abs() < 1e-15);
        }
        let avg = upstream_average(&x, &[0.0, 0.2, 0.0], &m);
        // ∫ up to 1, 8, 27: 1.5, 6, 13.5. Intervals: 0·1.5; 0.2·4.5; 0.2·7.5.
        assert!(avg[0].abs() < 1e-15);
        assert!((avg[1] - 0.2 * 4.5 / 6.0).abs() < 1e-15);
        assert!((avg[2] - 0.2 * 12.0 / 13.5).abs() < 1e-15);
    }

    #[test]
    fn worst_counts_only_the_stations_asked_for_and_nan_as_infinite() {
        let parts = Parts {
            grid: vec![[vec![0.5, 0.01], vec![0.0, 0.02], vec![0.0; 2], vec![0.0; 2]]],
            step: vec![[vec![0.0, 0.01], vec![0.0; 2], vec![0.0; 2], vec![0.0, 0.0]]],
        };
        let w = parts.worst_from(&[1e-5, 1e-4], 1e-4);
        assert_eq!((w.grid, w.step, w.total), (0.02, 0.01, 0.02));
        let mut nan = parts.clone();
        nan.step[0][3][1] = f64::NAN;
        assert!(nan.worst_from(&[1e-5, 1e-4], 1e-4).total.is_infinite());
    }
}
