//! Grid-convergence studies: the numerical uncertainty of a figure from its values on several
//! grids.
//!
//! Owns: Richardson extrapolation with the observed order, the Grid Convergence Index (GCI), the
//! detection of oscillatory and non-monotone convergence, the refinement schedule (cells of the
//! k-th grid, the placement of the grids) and the result types the report shows.
//!
//! Invariant: this file solves nothing. Its submodule [`runs`] runs the grids (through
//! `pipeline::run_once`) and hands the values here.
//!
//! # The procedure
//!
//! Three grids of spacing h₁ < h₂ < h₃ (fine, medium, coarse) with values φ₁, φ₂, φ₃; ratios
//! r₂₁ = h₂/h₁ and r₃₂ = h₃/h₂, which need not be equal. With ε₂₁ = φ₂ − φ₁, ε₃₂ = φ₃ − φ₂ and
//! s = sign(ε₃₂/ε₂₁), the observed order p solves (Celik, Ghia, Roache & Freitas 2008, J. Fluids
//! Eng. 130, 078001, eqs. 3–5)
//!
//! ```text
//!     p = ( ln|ε₃₂/ε₂₁| + q(p) ) / ln r₂₁,    q(p) = ln( (r₂₁ᵖ − s) / (r₃₂ᵖ − s) ),
//! ```
//!
//! by fixed-point iteration from q = 0 (q vanishes for a constant ratio, and p is then explicit).
//! Celik et al. take the absolute value of the bracket; it is kept signed here, so that a
//! sequence whose changes grow (divergence) shows a negative order instead of a plausible one.
//! The extrapolated value is φ_ext = (r₂₁ᵖ·φ₁ − φ₂)/(r₂₁ᵖ − 1) (eq. 6) and the fine-grid GCI
//! (eq. 9; Roache 1994, J. Fluids Eng. 116, 405)
//!
//! ```text
//!     GCI = F_s · |ε₂₁/φ₁| / (r₂₁ᵖ − 1),
//! ```
//!
//! a relative bound on |φ₁ − φ_exact|/|φ₁| that is meant to hold with about 95 % confidence.
//!
//! # What is done with doubtful data
//!
//! - Safety factor F_s = 1.25 only for three or more grids whose observed order lies in the
//!   sensible band [`SENSIBLE_ORDER`] around the formal order 2 of the scheme (Roache 1994).
//! - An observed order outside that band is not trusted: F_s = 3, and the order used in the GCI
//!   and in the extrapolation is the observed one clamped to [`ORDER_CLAMP`] = [0.5, 2], so that
//!   an order fitted too high (super-convergence or luck) never narrows the bound below what the
//!   formal order gives, and one fitted too low (or negative: divergence) widens it, but only
//!   to a finite width. The observed order is reported as fitted; the order used beside it.
//! - Oscillatory convergence (s < 0: the successive changes flip sign, common with staircase
//!   walls and with grid offsets that change between grids) fits no order at all: the bound is
//!   F_s = 3 times half the range of the three values, U = 1.5·(max − min) (three times the
//!   half-range bound of Stern, Wilson, Coleman & Paterson 2001, J. Fluids Eng. 123, 793), and
//!   the fine value is not extrapolated.
//! - A fine change that is small by chance (the finest two grids agree where the coarse one
//!   does not: a figure with a component that varies irregularly with where the nodes fall,
//!   such as u_max/ū read from the largest node value) would make the GCI small by chance. The
//!   bound is therefore, where the order fitted is above [`LUCKY_ORDER_FACTOR`] times the
//!   formal one, at least the same GCI formed with the finest and the coarsest of the three
//!   grids, F_s·|φ₃ − φ₁|/|φ₁|/((r₂₁·r₃₂)ᵖ − 1), which for values that do follow hᵖ is the
//!   same number. Measured (tenth session) on a keyhole with `--accuracy 1e-5`: u_max/ū's
//!   finest changes fitted an order of 15 and a band of 2.4e-8 against a true error of 8.8e-7
//!   (canalis's own extrapolated reference); with the wider pair the band is 3.3e-6
//!   (tests/corners.rs).
//! - Two grids only (the cheap estimate): the formal order 2 is assumed and F_s = 3 (Roache
//!   1994, for two-grid studies).
//! - Changes at the level of round-off give the floor [`ROUND_OFF_FLOOR`] instead of zero.

pub mod entrance;
pub mod runs;

/// Formal order of accuracy of the cut-cell scheme for the figures of merit (Gibou et al. 2002,
/// second order; DEVELOPERS.md, numerical notes).
pub const FORMAL_ORDER: f64 = 2.0;
/// Safety factor of the GCI for three or more grids with an observed order in the sensible band
/// (Roache 1994; Celik et al. 2008).
pub const SAFETY_FACTOR_FITTED: f64 = 1.25;
/// Safety factor for two grids, an assumed order, or an order outside the sensible band
/// (Roache 1994).
pub const SAFETY_FACTOR_CAUTIOUS: f64 = 3.0;
/// Observed orders within ±25 % of the formal order count as sensible (F_s = 1.25).
pub const SENSIBLE_ORDER: (f64, f64) = (0.75 * FORMAL_ORDER, 1.25 * FORMAL_ORDER);
/// The order used in the bound is the observed one clamped to this band.
pub const ORDER_CLAMP: (f64, f64) = (0.5, FORMAL_ORDER);
/// Smallest relative uncertainty reported: below this, changes between grids are at the level
/// of the algebraic solve (CG to a relative residual of 1e-10) and round-off, not discretisation.
pub const ROUND_OFF_FLOOR: f64 = 1e-10;

/// An observed order above this multiple of the formal order is taken for a fine change small
/// by chance, and the GCI of the finest and coarsest of the three grids bounds it from below
/// (module notes). Canalis's choice, from the measurements there: u_max/ū of the keyhole fitted
/// an order of 15 (changes 437 times apart at a ratio of 1.5) and its GCI missed the error 37
/// times; the Nu_H1 of the same study fitted 4.6 (changes 6.5 times apart) and its GCI held the
/// error (4.9e-6 against 3.5e-6), while the wider pair would have sent the study to grids five
/// times as costly.
pub const LUCKY_ORDER_FACTOR: f64 = 3.0;
/// Nominal refinement ratio between successive grids of a study (within the 1.3–2 that keeps
/// three grids distinct yet in the same asymptotic range; Celik et al. 2008 ask for r > 1.3).
pub const STUDY_RATIO: f64 = 1.5;
/// Refinement ratio of the cheap estimate's one coarser grid: a coarse solve costs about
/// 1/1.75² ≈ 1/3 of the fine one.
pub const CHEAP_RATIO: f64 = 1.75;

/// Formal order assumed for the image-resolution error of a mask: the staircase of a binary
/// image, or of any image in `--mask-mode pixels`, misplaces the wall by up to half a pixel, an
/// error of first order in the pixel size (an O(h) perturbation of the boundary moves f·Re by
/// O(h)); tracing grey levels does better, so order 1 is the cautious assumption.
pub const IMAGE_ORDER: f64 = 1.0;
/// Coarsening factors of the images of an `--accuracy` study of a mask, coarse to fine (the
/// given image is factor 1): ratios 4/3, 3/2 and 2, within the 1.3–2 of Celik et al. (2008).
pub const IMAGE_STUDY_FACTORS: [usize; 4] = [4, 3, 2, 1];
/// Coarsening factors of the cheap estimate of a mask: two coarser images, of
/// blocks of 3 × 3 and 2 × 2 pixels, a third of the fine solve's cost (1/9 + 1/4), like the
/// grid's cheap estimate; one coarser image alone did not cover the error (see
/// [`image_estimate`]).
pub const IMAGE_CHEAP_FACTORS: [usize; 3] = [3, 2, 1];

/// The value of one quantity on one grid of spacing `h`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sample {
    pub h: f64,
    pub value: f64,
}

/// How the values behaved as the grid was refined.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Behaviour {
    /// Three grids, same-sign changes, observed order in the sensible band.
    Monotone,
    /// Three grids, same-sign changes, observed order outside the sensible band (or not
    /// computable); clamped.
    OrderOutsideBand,
    /// Three grids, the changes flip sign.
    Oscillatory,
    /// Two grids; the formal order assumed.
    AssumedOrder,
    /// The changes are at round-off level.
    RoundOff,
}

impl Behaviour {
    /// Machine-readable name (the report's `convergence` key).
    pub fn key(self) -> &'static str {
        match self {
            Behaviour::Monotone => "monotone",
            Behaviour::OrderOutsideBand => "order outside the sensible band",
            Behaviour::Oscillatory => "oscillatory",
            Behaviour::AssumedOrder => "assumed order",
            Behaviour::RoundOff => "round-off",
        }
    }
}

/// The uncertainty estimate of one quantity.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Estimate {
    /// The finest grid's value.
    pub fine: f64,
    /// Richardson-extrapolated value (the fine value when nothing can be extrapolated).
    pub extrapolated: f64,
    /// Observed order as fitted; None for two grids or oscillatory data.
    pub observed_order: Option<f64>,
    /// Order used in the bound and the extrapolation; None when no order applies (oscillatory).
    pub order_used: Option<f64>,
    pub safety_factor: f64,
    /// The GCI of the fine grid (or the oscillation bound), relative to |fine|.
    pub relative_uncertainty: f64,
    pub behaviour: Behaviour,
}

impl Estimate {
    /// Absolute uncertainty, in the quantity's unit.
    pub fn absolute(&self) -> f64 {
        self.relative_uncertainty * self.fine.abs()
    }
}

/// The observed order p of Celik et al. (2008) from the changes ε₂₁ = φ₂ − φ₁ and
/// ε₃₂ = φ₃ − φ₂ on grids of ratios r₂₁ = h₂/h₁ and r₃₂ = h₃/h₂ (see the module notes).
/// Signed: negative when the changes grow. None when the data fix no order (a zero change, sign
/// flips, or a fixed-point iteration that does not settle).
pub fn observed_order(e21: f64, e32: f64, r21: f64, r32: f64) -> Option<f64> {
    if !(e21.is_finite() && e32.is_finite()) || e21 == 0.0 || e32 == 0.0 {
        return None;
    }
    if e21.signum() != e32.signum() || !(r21 > 1.0 && r32 > 1.0) {
        return None;
    }
    let lr = (e32 / e21).abs().ln();
    let ln21 = r21.ln();
    let q = |p: f64| {
        let a = r21.powf(p) - 1.0;
        let b = r32.powf(p) - 1.0;
        if a / b > 0.0 {
            Some((a / b).ln())
        } else {
            None
        }
    };
    let mut p = lr / ln21;
    // The map p ↦ (lr + q(p))/ln r₂₁ is a contraction for ratios of similar size (|q′| is of
    // order |ln(r₂₁/r₃₂)|·(…) < ln r₂₁); a few tens of steps reach round-off.
    for _ in 0..200 {
        if p.abs() < 1e-12 {
            // r^p − 1 → 0: q tends to ln(ln r₂₁ / ln r₃₂); take that limit.
            p = (lr + (ln21 / r32.ln()).ln()) / ln21;
            continue;
        }
        let next = (lr + q(p)?) / ln21;
        if (next - p).abs() <= 1e-12 * (1.0 + p.abs()) {
            return next.is_finite().then_some(next);
        }
        p = next;
    }
    None
}

/// Richardson extrapolation of the fine value with order p and ratio r: φ₁ + (φ₁ − φ₂)/(rᵖ − 1).
pub fn extrapolate(fine: f64, coarse: f64, r: f64, p: f64) -> f64 {
    fine + (fine - coarse) / (r.powf(p) - 1.0)
}

/// Relative size of a change that counts as round-off.
fn is_round_off(change: f64, value: f64) -> bool {
    change.abs() <= ROUND_OFF_FLOOR * value.abs()
}

/// The two-grid estimate: formal order assumed, F_s = 3. `fine.h < coarse.h`. None when a value
/// is not finite or the spacings are not ordered.
pub fn two_grids(fine: Sample, coarse: Sample) -> Option<Estimate> {
    two_grids_of_order(fine, coarse, FORMAL_ORDER)
}

/// [`two_grids`] for a discretisation of formal order `formal` (assumed instead of 2).
pub fn two_grids_of_order(fine: Sample, coarse: Sample, formal: f64) -> Option<Estimate> {
    if !(fine.value.is_finite() && coarse.value.is_finite() && coarse.h > fine.h && fine.h > 0.0) {
        return None;
    }
    let r = coarse.h / fine.h;
    let e = coarse.value - fine.value;
    let p = formal;
    let fs = SAFETY_FACTOR_CAUTIOUS;
    let rel = fs * (e / fine.value).abs() / (r.powf(p) - 1.0);
    Some(Estimate {
        fine: fine.value,
        extrapolated: extrapolate(fine.value, coarse.value, r, p),
        observed_order: None,
        order_used: Some(p),
        safety_factor: fs,
        relative_uncertainty: rel.max(ROUND_OFF_FLOOR),
        behaviour: if is_round_off(e, fine.value) {
            Behaviour::RoundOff
        } else {
            Behaviour::AssumedOrder
        },
    })
}

/// The three-grid estimate (module notes) for a discretisation of formal order `formal`
/// (2 for the grids of a study, [`IMAGE_ORDER`] for the images of a mask). `fine.h < medium.h <
/// coarse.h`. None when a value is not finite or the spacings are not ordered. The sensible
/// band is ±25 % around `formal` and the order used is clamped to [0.5, `formal`] (as
/// [`SENSIBLE_ORDER`] and [`ORDER_CLAMP`] are for order 2).
pub fn three_grids_of_order(
    fine: Sample,
    medium: Sample,
    coarse: Sample,
    formal: f64,
) -> Option<Estimate> {
    let band = (0.75 * formal, 1.25 * formal);
    let clamp = (ORDER_CLAMP.0.min(formal), formal);
    let finite = [fine, medium, coarse].iter().all(|s| s.value.is_finite());
    if !(finite && fine.h > 0.0 && medium.h > fine.h && coarse.h > medium.h) {
        return None;
    }
    let (r21, r32) = (medium.h / fine.h, coarse.h / medium.h);
    let (e21, e32) = (medium.value - fine.value, coarse.value - medium.value);
    let phi = fine.value;
    if is_round_off(e21, phi) && is_round_off(e32, phi) {
        return Some(Estimate {
            fine: phi,
            extrapolated: phi,
            observed_order: None,
            order_used: None,
            safety_factor: SAFETY_FACTOR_FITTED,
            relative_uncertainty: ROUND_OFF_FLOOR,
            behaviour: Behaviour::RoundOff,
        });
    }
    if e21 * e32 < 0.0 {
        let values = [fine.value, medium.value, coarse.value];
        let max = values.iter().copied().fold(f64::MIN, f64::max);
        let min = values.iter().copied().fold(f64::MAX, f64::min);
        let fs = SAFETY_FACTOR_CAUTIOUS;
        return Some(Estimate {
            fine: phi,
            extrapolated: phi,
            observed_order: None,
            order_used: None,
            safety_factor: fs,
            relative_uncertainty: (fs * 0.5 * (max - min) / phi.abs()).max(ROUND_OFF_FLOOR),
            behaviour: Behaviour::Oscillatory,
        });
    }
    let p_obs = observed_order(e21, e32, r21, r32);
    let sensible = p_obs.is_some_and(|p| (band.0..=band.1).contains(&p));
    let (fs, behaviour) = if sensible {
        (SAFETY_FACTOR_FITTED, Behaviour::Monotone)
    } else {
        (SAFETY_FACTOR_CAUTIOUS, Behaviour::OrderOutsideBand)
    };
    // A zero fine change with a non-zero coarse one fixes no order (p_obs None): treat it as an
    // order far above the band, i.e. the formal order with F_s = 3.
    let p = p_obs.unwrap_or(f64::INFINITY).clamp(clamp.0, clamp.1);
    // The GCI of the finest pair; where the order fitted is far above the formal one (the
    // fine change small by chance), at least that of the finest and coarsest (module notes).
    let rel = fs * (e21 / phi).abs() / (r21.powf(p) - 1.0);
    let rel = if p_obs.is_none_or(|q| q > LUCKY_ORDER_FACTOR * formal) {
        rel.max(fs * ((e21 + e32) / phi).abs() / ((r21 * r32).powf(p) - 1.0))
    } else {
        rel
    };
    Some(Estimate {
        fine: phi,
        extrapolated: extrapolate(phi, medium.value, r21, p),
        observed_order: p_obs,
        order_used: Some(p),
        safety_factor: fs,
        relative_uncertainty: rel.max(ROUND_OFF_FLOOR),
        behaviour,
    })
}

/// The estimate from a study's samples, ordered coarse to fine: the finest three grids (or
/// two). None with fewer than two usable samples.
pub fn estimate(samples: &[Sample]) -> Option<Estimate> {
    estimate_of_order(samples, FORMAL_ORDER)
}

/// [`estimate`] for a discretisation of formal order `formal` ([`IMAGE_ORDER`] for the
/// image-resolution error of a mask).
pub fn estimate_of_order(samples: &[Sample], formal: f64) -> Option<Estimate> {
    match samples {
        [] | [_] => None,
        [coarse, fine] => two_grids_of_order(*fine, *coarse, formal),
        [.., coarse, medium, fine] => three_grids_of_order(*fine, *medium, *coarse, formal),
    }
}

/// The estimate of an image-resolution study of a mask, samples coarse to fine (spacing = pixel
/// size of each image): [`estimate_of_order`] with the formal order [`IMAGE_ORDER`] (three
/// images: the oscillation bound or the GCI of the finest three), widened to the first-order
/// envelope max over every coarser image k of F_s·|φ_k − φ₁|/(h_k/h₁ − 1), F_s = 3.
///
/// Why the envelope. Staircase and tracing errors are first order with a coefficient that
/// changes irregularly with the pixel size (where the pixel faces fall on the wall), so the
/// finest pair alone can happen to agree: measured on binary and anti-aliased circles 100 and
/// 200 pixels across (tests/uncertainty.rs), the two-image GCI of blocks of 2 × 2 pixels
/// covered the true f·Re error in only 6 of 8 cases (ratios 0.2–10.6); with the envelope over
/// blocks of 2 and 3 in all 8 (1.2–10.6), over 2, 3 and 4 in all 8 (3.0–24.6). No order is
/// fitted to that noise: the envelope assumes order 1 with F_s = 3.
pub fn image_estimate(samples: &[Sample]) -> Option<Estimate> {
    let mut e = estimate_of_order(samples, IMAGE_ORDER)?;
    let fine = samples.last()?;
    let envelope = samples[..samples.len() - 1]
        .iter()
        .map(|s| {
            SAFETY_FACTOR_CAUTIOUS * ((s.value - fine.value) / fine.value).abs()
                / (s.h / fine.h - 1.0)
        })
        .fold(0.0, f64::max);
    if envelope > e.relative_uncertainty {
        e.relative_uncertainty = envelope;
        e.safety_factor = SAFETY_FACTOR_CAUTIOUS;
    }
    Some(e)
}

/// Cells across of the k-th grid (k = 0 the coarsest) of a study starting at `first`:
/// round(first·1.5ᵏ), strictly increasing.
pub fn study_cells(first: usize, k: usize) -> usize {
    (first as f64 * STUDY_RATIO.powi(k as i32)).round() as usize
}

/// Cells across of the cheap estimate's coarser grid for a fine grid of `cells` cells.
pub fn cheap_cells(cells: usize) -> usize {
    (cells as f64 / CHEAP_RATIO).round() as usize
}

/// Refinement ratio of the cheap estimate's second coarser grid, run where re-entrant corners
/// are treated (`singular::Enrichment`; about half the fine solve's cost). There the error
/// carries a part that jumps from one cell count to the next (`singular`'s module notes: the
/// finned tube's Nu_H1 −2.5e-5 to −6.2e-5 over 292–308 cells), so one coarser grid can agree
/// with the fine one by chance; the estimate keeps, figure by figure, the wider bound of the
/// two pairs. Measured (tenth session) on shapes/finned_tube.toml at the default 600 cells:
/// with one coarser grid Nu_H1 and Nu_T were reported ± 6.0e-6 and 4.4e-6 against errors of
/// 1.2e-5 and 9.0e-6.
pub const CHEAP_SECOND_RATIO: f64 = 1.4;

/// Figure by figure, the estimate of `a` or `b` with the wider bound (an estimate over none).
pub fn wider_of(a: Vec<Quantity>, b: Vec<Quantity>) -> Vec<Quantity> {
    a.into_iter()
        .zip(b)
        .map(|(p, q)| match (&p.estimate, &q.estimate) {
            (Some(x), Some(y)) if y.relative_uncertainty > x.relative_uncertainty => q,
            (None, Some(_)) => q,
            _ => p,
        })
        .collect()
}

/// Cells across of the cheap estimate's second coarser grid ([`CHEAP_SECOND_RATIO`]).
pub fn cheap_second_cells(cells: usize) -> usize {
    (cells as f64 / CHEAP_SECOND_RATIO).round() as usize
}

/// Placement of every grid of a study ([`crate::grid::Grid::covering_placed`]): the box centre
/// sits (√2 − 1, (√5 − 1)/2 − ½) ≈ (0.414, 0.118) of a cell beyond a node, along x and y.
///
/// Why one placement for all grids. Richardson extrapolation assumes geometrically similar grids
/// (Celik et al. 2008). Measured on the exact cases at 64–486 cells: at a fixed placement the
/// f·Re error of each case is a smooth power of h (order ≈ 2.5 on curved walls with the wall
/// correction, 2.0 on the square), but its coefficient depends on the placement — it even
/// changes sign between placements (circle at 144 cells: −2.1e-6, +1.3e-6, −8.4e-7 at three
/// offsets). Grids whose offsets differ therefore show sign flips in four of the five cases and
/// fit no order. A placement away from 0 and ½ keeps the special alignments (a wall on a grid
/// line, a centre on a node) out of the study, so that they do not flatter it; the finest grid's
/// result reported with the estimate is at this same placement.
pub const STUDY_PLACEMENT: [f64; 2] = [0.414_213_562_373_095, 0.118_033_988_749_895];

/// Offset of the cheap estimate's coarser grid against the user's grid (which keeps its own
/// placement): the two grids meet the walls differently, so the difference between them carries
/// the placement-dependent part of the error, and an aligned fine grid (a square whose walls sit
/// half a cell from the nodes) does not get a bound from an equally aligned coarse one.
pub const CHEAP_OFFSET: [f64; 2] = [0.381_966, 0.414_214];

/// An order for a sentence: "2", "1.33".
fn format_order(p: f64) -> String {
    if (p - p.round()).abs() < 1e-9 {
        format!("{}", p.round())
    } else {
        format!("{p:.2}")
    }
}

/// "one coarser grid", or "two coarser grids, the wider bound of each figure" (the cheap
/// estimate at treated corners, [`CHEAP_SECOND_RATIO`]).
pub fn cheap_grids(grids: &[usize]) -> &'static str {
    if grids.len() > 2 {
        "two coarser grids, the wider bound of each figure"
    } else {
        "one coarser grid"
    }
}

/// The coarser grids' cells of a cheap estimate, "343" or "343 and 429".
pub fn coarse_cells(grids: &[usize]) -> String {
    let coarse = &grids[..grids.len().saturating_sub(1)];
    coarse
        .iter()
        .map(|c| c.to_string())
        .collect::<Vec<_>>()
        .join(" and ")
}

/// Why the formal order is below 2, if it is.
fn corner_note(p: f64) -> &'static str {
    if p < FORMAL_ORDER - 1e-9 {
        " for the figures an untreated re-entrant corner limits (2π/α of the sharpest), 2 \
         for the others (each figure's order_used)"
    } else {
        ""
    }
}

/// How an [`Uncertainty`] was obtained.
#[derive(Debug, Clone, PartialEq)]
pub enum Kind {
    /// A refinement study towards a relative accuracy (`--accuracy`); `reached` says whether
    /// every targeted quantity got there.
    Study { target: f64, reached: bool },
    /// One coarser grid, formal order assumed.
    Cheap,
    /// No estimate; the reason.
    Unavailable(String),
}

/// One quantity of an [`Uncertainty`].
#[derive(Debug, Clone, PartialEq)]
pub struct Quantity {
    /// The report key, e.g. "fanning_f_re".
    pub key: &'static str,
    /// The finest grid's value.
    pub fine: f64,
    /// None when nothing could be estimated.
    pub estimate: Option<Estimate>,
    /// Whether a study refines until this quantity meets the target.
    pub targeted: bool,
}

/// The uncertainty of a run's figures.
#[derive(Debug, Clone, PartialEq)]
pub struct Uncertainty {
    pub kind: Kind,
    /// Cells across of each grid used, coarse to fine.
    pub grids: Vec<usize>,
    /// How the grids were laid, in words (the report's `grid_placement` key).
    pub placement: String,
    pub quantities: Vec<Quantity>,
    /// For a mask: the coarsening factor of each image of an image-resolution study, coarse to
    /// fine (1 = the given image), and the given image's size in pixels (width, height); empty
    /// for a study of the grid alone.
    pub images: Vec<usize>,
    pub image_size: [usize; 2],
    /// The formal order the estimate assumes for the grid (2, or less where re-entrant corners
    /// forbid it: [`corner_formal_order`]); [`IMAGE_ORDER`] governs a mask's images instead.
    pub formal_order: f64,
}

/// The formal order of a grid study of a cross-section whose corners allow `corner_order`
/// (`post::Figures::corner_order`: min(2, 2π/α) over the untreated re-entrant corners; None
/// when the corners are not known): never more than the scheme's [`FORMAL_ORDER`], and never
/// more than the corners allow (a study that assumed order 2 on an L-shape, whose figures
/// converge like h^(4/3), claimed half the true error).
pub fn corner_formal_order(corner_order: Option<f64>) -> f64 {
    corner_order.map_or(FORMAL_ORDER, |p| p.clamp(0.5, FORMAL_ORDER))
}

impl Uncertainty {
    /// The quantity with report key `key`.
    pub fn get(&self, key: &str) -> Option<&Quantity> {
        self.quantities.iter().find(|q| q.key == key)
    }

    /// One line saying how the estimate was made (the report's `method` key).
    pub fn method(&self) -> String {
        if !self.images.is_empty() {
            return self.image_method();
        }
        match &self.kind {
            Kind::Study { target, .. } => format!(
                "grid-convergence study towards a relative accuracy of {target:.1e}: Richardson \
                 extrapolation with the observed order of the finest three of {} grids and the \
                 Grid Convergence Index (Celik et al. 2008; Roache 1994), formal order {}{}",
                self.grids.len(),
                format_order(self.formal_order),
                corner_note(self.formal_order)
            ),
            Kind::Cheap => format!(
                "cheap, {} ({} cells across), assumed order {}{}, \
                 safety factor {SAFETY_FACTOR_CAUTIOUS} (Roache 1994); use --accuracy for a study",
                cheap_grids(&self.grids),
                coarse_cells(&self.grids),
                format_order(self.formal_order),
                corner_note(self.formal_order)
            ),
            Kind::Unavailable(why) => format!("not available: {why}"),
        }
    }

    /// [`Uncertainty::method`] of an image-resolution study of a mask.
    fn image_method(&self) -> String {
        let [w, h] = self.image_size;
        let coarse: Vec<String> = self
            .images
            .iter()
            .filter(|&&k| k > 1)
            .map(|k| format!("{k} × {k}"))
            .collect();
        let images = format!(
            "the mask image ({w} × {h} pixels) and coarser images of it (blocks of {} pixels \
             averaged, the pixel size scaled alike), each solved on a grid in proportion to its \
             pixels ({} cells across), so that the image-resolution and grid errors shrink \
             together",
            coarse.join(", "),
            self.grids
                .iter()
                .map(|c| c.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        );
        match &self.kind {
            Kind::Study { target, .. } => format!(
                "image-resolution study towards a relative accuracy of {target:.1e}: {images}; \
                 Richardson extrapolation and the Grid Convergence Index of the finest three \
                 (Celik et al. 2008; Roache 1994), formal order {IMAGE_ORDER} (staircase)"
            ),
            Kind::Cheap => format!(
                "cheap, image resolution: {images}; assumed order {IMAGE_ORDER}, safety factor \
                 {SAFETY_FACTOR_CAUTIOUS} (Roache 1994); use --accuracy for a study"
            ),
            Kind::Unavailable(why) => format!("not available: {why}"),
        }
    }

    /// Short marker (the report's `estimate` key): "study", "cheap" or "not available".
    pub fn marker(&self) -> &'static str {
        match self.kind {
            Kind::Study { .. } => "study",
            Kind::Cheap => "cheap",
            Kind::Unavailable(_) => "not available",
        }
    }

    /// Warnings about the estimate: oscillatory or doubtful convergence of a quantity.
    pub fn warnings(&self) -> Vec<String> {
        let mut out = Vec::new();
        let three = self.grids.len() >= 3;
        let formal = if self.images.is_empty() {
            self.formal_order
        } else {
            IMAGE_ORDER
        };
        let band = (0.75 * formal, 1.25 * formal);
        for q in &self.quantities {
            let Some(e) = &q.estimate else { continue };
            match e.behaviour {
                Behaviour::Oscillatory => out.push(format!(
                    "{}: the values on the finest three grids (or images) oscillate (the changes flip \
                     sign); no order is fitted and the uncertainty is the wider bound 1.5 × \
                     their range ({:.1e} relative)",
                    q.key, e.relative_uncertainty
                )),
                Behaviour::OrderOutsideBand if three => {
                    let fitted = e
                        .observed_order
                        .map(|p| format!("{p:.2}"))
                        .unwrap_or_else(|| "undetermined".to_string());
                    // Above the band the bound uses the formal order with F_s = 3, which is
                    // conservative: no warning, the `convergence` key says it.
                    if e.observed_order.is_none_or(|p| p < band.0) {
                        out.push(format!(
                            "{}: observed order {fitted} is outside the sensible band {}–{} \
                             (formal order {formal}); the bound uses order {:.2} and \
                             safety factor {SAFETY_FACTOR_CAUTIOUS}",
                            q.key,
                            band.0,
                            band.1,
                            e.order_used.unwrap_or(formal)
                        ));
                    }
                }
                _ => {}
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Samples of f(h) on grids of the given spacings.
    fn samples(f: impl Fn(f64) -> f64, hs: &[f64]) -> Vec<Sample> {
        hs.iter().map(|&h| Sample { h, value: f(h) }).collect()
    }

    /// Samples of the given values on grids of the given spacings.
    fn given(hs: &[f64], vals: &[f64]) -> Vec<Sample> {
        hs.iter()
            .zip(vals)
            .map(|(&h, &value)| Sample { h, value })
            .collect()
    }

    fn rel(a: f64, b: f64) -> f64 {
        ((a - b) / b).abs()
    }

    #[test]
    fn exact_second_order_sequence_constant_ratio() {
        // f(h) = f0 + c·h², r = 2: the textbook case (Roache 1994, worked GCI example form).
        // Observed order exactly 2, Richardson exact, GCI = 1.25·|ε₂₁/φ₁|/3.
        let s = samples(|h| 16.0 + 3.0 * h * h, &[0.04, 0.02, 0.01]);
        let e = estimate(&s).unwrap();
        assert_eq!(e.behaviour, Behaviour::Monotone);
        assert!((e.observed_order.unwrap() - 2.0).abs() < 1e-10);
        assert!(rel(e.extrapolated, 16.0) < 1e-14);
        let gci = 1.25 * (3.0 * (0.02f64.powi(2) - 0.01f64.powi(2)) / s[2].value) / 3.0;
        assert!(rel(e.relative_uncertainty, gci) < 1e-10);
        assert_eq!(e.safety_factor, SAFETY_FACTOR_FITTED);
        // The true error lies inside the bound.
        assert!(rel(e.fine, 16.0) < e.relative_uncertainty);
    }

    #[test]
    fn exact_second_order_sequence_non_constant_ratio() {
        // Ratios 1.5 then 1.3: q(p) ≠ 0, the fixed-point iteration of Celik et al. (2008).
        let h1 = 0.01;
        let s = samples(|h| 2.0 - 0.7 * h * h, &[h1 * 1.5 * 1.3, h1 * 1.5, h1]);
        let e = estimate(&s).unwrap();
        assert!(
            (e.observed_order.unwrap() - 2.0).abs() < 1e-9,
            "{:?}",
            e.observed_order
        );
        assert!(rel(e.extrapolated, 2.0) < 1e-13);
    }

    #[test]
    fn order_one_and_a_half_is_recovered() {
        // f(h) = f0 + c·h^1.5 on ratios 1.4 and 1.7: the order is recovered exactly; 1.5 is
        // at the edge of the sensible band (F_s 1.25), and the bound holds.
        let h1 = 0.004;
        let s = samples(
            |h| 10.0 + 5.0 * h.powf(1.5),
            &[h1 * 1.4 * 1.7, h1 * 1.4, h1],
        );
        let e = estimate(&s).unwrap();
        assert!((e.observed_order.unwrap() - 1.5).abs() < 1e-9);
        assert!(rel(e.extrapolated, 10.0) < 1e-12);
        assert!(rel(e.fine, 10.0) < e.relative_uncertainty);
        // h^1.2: outside the band, F_s = 3, order used 1.2, still a bound.
        let s = samples(|h| 10.0 + 5.0 * h.powf(1.2), &[0.02, 0.01, 0.005]);
        let e = estimate(&s).unwrap();
        assert_eq!(e.behaviour, Behaviour::OrderOutsideBand);
        assert!((e.order_used.unwrap() - 1.2).abs() < 1e-9);
        assert_eq!(e.safety_factor, SAFETY_FACTOR_CAUTIOUS);
        assert!(rel(e.fine, 10.0) < e.relative_uncertainty);
    }

    #[test]
    fn order_above_formal_is_clamped_to_formal() {
        // f0 + c·h³: observed 3, above the band; the bound uses order 2 with F_s = 3, which
        // over-covers the true error.
        let s = samples(|h| 1.0 + h.powi(3), &[0.3, 0.2, 0.1]);
        let e = estimate(&s).unwrap();
        assert!((e.observed_order.unwrap() - 3.0).abs() < 1e-9);
        assert_eq!(e.order_used, Some(FORMAL_ORDER));
        assert_eq!(e.behaviour, Behaviour::OrderOutsideBand);
        assert!(rel(e.fine, 1.0) < e.relative_uncertainty);
    }

    #[test]
    fn a_fine_change_small_by_chance_is_bounded_by_the_wider_pair() {
        // Errors c·h² plus a part that changes irregularly with the grid and happens to cancel
        // on the finest two (as the keyhole's u_max/ū in tests/corners.rs): values 1 + 4e-4,
        // 1 + 1.0e-5, 1 + 1.0e-5 + 1e-9 on ratios 1.5 fit an order far above the formal one.
        // The finest pair alone gives a bound of 3e-9 against a true error of 1e-5; the finest
        // and the coarsest give 3·|φ₃ − φ₁|/(2.25² − 1) ≈ 2.9e-4.
        let hs = [0.0225, 0.015, 0.01];
        let vals = [1.0 + 4e-4, 1.0 + 1.0e-5 + 1e-9, 1.0 + 1.0e-5];
        let s = given(&hs, &vals);
        let e = estimate(&s).unwrap();
        assert!(e.observed_order.unwrap() > LUCKY_ORDER_FACTOR * FORMAL_ORDER);
        let wide = 3.0 * (4e-4 - 1.0e-5) / (1.0 + 1.0e-5) / (2.25f64.powi(2) - 1.0);
        assert!(rel(e.relative_uncertainty, wide) < 1e-9, "{e:?}");
        assert!(rel(e.fine, 1.0) < e.relative_uncertainty);
        // An order above the band but below 3× the formal one keeps the finest pair's bound.
        let s = samples(|h| 1.0 + h.powi(3), &[0.3, 0.2, 0.1]);
        let e = estimate(&s).unwrap();
        let fine_pair = 3.0 * (0.2f64.powi(3) - 0.1f64.powi(3)) / 1.001 / 3.0;
        assert!(rel(e.relative_uncertainty, fine_pair) < 1e-9, "{e:?}");
    }

    #[test]
    fn oscillatory_sequence_gets_the_wide_bound_and_no_order() {
        // f(h) = f0 + c·h²·(−1)^k (signs flip from grid to grid): no order is fitted, the bound
        // is 1.5·range (Stern et al. 2001 half-range with F_s = 3), the value not extrapolated.
        let hs = [0.04, 0.02, 0.01];
        let vals = [16.0 + 0.0016, 16.0 - 0.0004, 16.0 + 0.0001];
        let s = given(&hs, &vals);
        let e = estimate(&s).unwrap();
        assert_eq!(e.behaviour, Behaviour::Oscillatory);
        assert_eq!(e.observed_order, None);
        assert_eq!(e.extrapolated, e.fine);
        assert!(rel(e.relative_uncertainty, 1.5 * 0.002 / 16.0001) < 1e-12);
        assert!(rel(e.fine, 16.0) < e.relative_uncertainty);
    }

    #[test]
    fn growing_changes_give_a_negative_order_and_a_clamped_bound() {
        // Divergence: |ε₂₁| > |ε₃₂| with the same sign. Signed order < 0, order used 0.5.
        let s = samples(|h| 1.0 + 0.01 / h, &[0.4, 0.2, 0.1]);
        let e = estimate(&s).unwrap();
        assert!(e.observed_order.unwrap() < 0.0);
        assert_eq!(e.order_used, Some(ORDER_CLAMP.0));
        assert_eq!(e.safety_factor, SAFETY_FACTOR_CAUTIOUS);
    }

    #[test]
    fn two_grids_assume_the_formal_order() {
        let s = samples(|h| 16.0 + 2.0 * h * h, &[0.0175, 0.01]);
        let e = estimate(&s).unwrap();
        assert_eq!(e.behaviour, Behaviour::AssumedOrder);
        assert_eq!(e.observed_order, None);
        assert!(rel(e.extrapolated, 16.0) < 1e-13);
        let r2 = 1.75f64 * 1.75 - 1.0;
        let want = 3.0 * 2.0 * (0.0175f64.powi(2) - 1e-4) / s[1].value / r2;
        assert!(rel(e.relative_uncertainty, want) < 1e-10);
    }

    #[test]
    fn round_off_and_bad_data() {
        let s = samples(|_| 3.0, &[0.3, 0.2, 0.1]);
        let e = estimate(&s).unwrap();
        assert_eq!(e.behaviour, Behaviour::RoundOff);
        assert_eq!(e.relative_uncertainty, ROUND_OFF_FLOOR);
        assert!(estimate(&s[..1]).is_none());
        let bad = [
            Sample { h: 0.2, value: 1.0 },
            Sample {
                h: 0.1,
                value: f64::NAN,
            },
        ];
        assert!(estimate(&bad).is_none());
        // Spacings out of order are refused.
        assert!(two_grids(Sample { h: 0.3, value: 1.0 }, bad[0]).is_none());
    }

    #[test]
    fn schedule_and_offsets() {
        let cells: Vec<usize> = (0..5).map(|k| study_cells(64, k)).collect();
        assert_eq!(cells, vec![64, 96, 144, 216, 324]);
        assert_eq!(cheap_cells(600), 343);
        assert!(STUDY_PLACEMENT
            .iter()
            .all(|v| (0.05..0.45).contains(v) || (0.55..0.95).contains(v)));
    }
}
