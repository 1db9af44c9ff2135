//! Fluid property models: dynamic viscosity, density, thermal conductivity and isobaric specific
//! heat of the working fluid at an operating point.
//!
//! Owns: the property formulations (at present liquid water at atmospheric pressure), their
//! supported ranges, and the warnings that go with the edges of those ranges. Knows nothing about
//! ducts, grids or flow; the rest of the crate only reads a [`FluidProperties`].
//!
//! Water is described by four published formulations:
//!
//! * viscosity: the IAPWS 2008 formulation for the viscosity of ordinary water substance
//!   (IAPWS R12-08), see [`water_viscosity`];
//! * density at 1 atm: the Kell (1975) rational function of temperature, see [`water_density`];
//! * thermal conductivity: the IAPWS 2011 formulation for the thermal conductivity of ordinary
//!   water substance (IAPWS R15-11), see [`water_conductivity`];
//! * isobaric specific heat at 1 atm: region 1 of the IAPWS Industrial Formulation 1997
//!   (IAPWS-IF97), see [`water_specific_heat`].

use crate::error::{Error, Result};

/// Properties of a fluid at one operating point, in SI units.
#[derive(Debug, Clone, PartialEq)]
pub struct FluidProperties {
    /// Name of the fluid, e.g. "water".
    pub name: String,
    /// Dynamic viscosity μ in Pa·s.
    pub viscosity_pa_s: f64,
    /// Density ρ in kg/m³.
    pub density_kg_m3: f64,
    /// Temperature in kelvin at which the properties were evaluated, when known.
    pub temperature_k: Option<f64>,
    /// Thermal conductivity k in W/(m·K), when known.
    pub conductivity_w_mk: Option<f64>,
    /// Isobaric specific heat capacity c_p in J/(kg·K), when known.
    pub specific_heat_j_kgk: Option<f64>,
    /// The formulations the values come from.
    pub source: String,
}

impl FluidProperties {
    /// Prandtl number Pr = μ c_p / k (dimensionless), when both the conductivity and the
    /// specific heat are known.
    pub fn prandtl(&self) -> Option<f64> {
        match (self.specific_heat_j_kgk, self.conductivity_w_mk) {
            (Some(cp), Some(k)) => Some(self.viscosity_pa_s * cp / k),
            _ => None,
        }
    }
}

/// Names accepted by [`by_name`] (compared case-insensitively).
pub const KNOWN_FLUIDS: &[&str] = &["water"];

// ---------------------------------------------------------------------------------------------
// Viscosity: IAPWS R12-08
// ---------------------------------------------------------------------------------------------

/// Reducing temperature T* of IAPWS R12-08 (the critical temperature), K.
pub const IAPWS_T_STAR_K: f64 = 647.096;
/// Reducing density ρ* of IAPWS R12-08 (the critical density), kg/m³.
pub const IAPWS_RHO_STAR_KG_M3: f64 = 322.0;
/// Reducing viscosity μ* of IAPWS R12-08, Pa·s.
pub const IAPWS_MU_STAR_PA_S: f64 = 1.0e-6;

/// Coefficients H_i, i = 0..3, of the dilute-gas term μ0 (IAPWS R12-08, table 1; from memory,
/// confirmed against the iapws Python package 1.5.5).
const IAPWS_H0: [f64; 4] = [1.67752, 2.20462, 0.636_656_4, -0.241_605];

/// Coefficients H_ij, i = 0..5 (rows), j = 0..6 (columns), of the residual term μ1
/// (IAPWS R12-08, table 2; from memory, confirmed against the iapws Python package 1.5.5).
/// Coefficients not listed in the release are zero.
#[rustfmt::skip]
const IAPWS_H1: [[f64; 7]; 6] = [
    //  j = 0         1             2             3            4             5            6
    [ 5.200_94e-1,  2.225_31e-1, -2.813_78e-1, 1.619_13e-1, -3.253_72e-2, 0.0,         0.0],
    [ 8.508_95e-2,  9.991_15e-1, -9.068_51e-1, 2.573_99e-1,  0.0,         0.0,         0.0],
    [-1.083_74,     1.887_97,    -7.724_79e-1, 0.0,          0.0,         0.0,         0.0],
    [-2.895_55e-1,  1.266_13,    -4.898_37e-1, 0.0,          6.984_52e-2, 0.0,        -4.356_73e-3],
    [ 0.0,          0.0,         -2.570_40e-1, 0.0,          0.0,         8.721_02e-3, 0.0],
    [ 0.0,          1.205_73e-1,  0.0,         0.0,          0.0,         0.0,        -5.932_64e-4],
];

/// Dynamic viscosity of ordinary water substance in Pa·s at temperature `temperature_k` (K) and
/// density `density_kg_m3` (kg/m³), by the IAPWS 2008 formulation (IAPWS R12-08).
///
/// With reduced variables T̄ = T/T*, ρ̄ = ρ/ρ* (T* = 647.096 K, ρ* = 322 kg/m³) and
/// μ* = 1 µPa·s,
///
/// ```text
/// μ/μ* = μ0(T̄) · μ1(T̄, ρ̄) · μ2(T̄, ρ̄)
/// μ0   = 100 √T̄ / Σ_{i=0}^{3} H_i / T̄^i                                  (dilute gas)
/// μ1   = exp[ ρ̄ Σ_{i=0}^{5} (1/T̄ − 1)^i Σ_{j=0}^{6} H_ij (ρ̄ − 1)^j ]     (residual)
/// μ2   = 1                                                               (critical enhancement)
/// ```
///
/// The critical enhancement μ2 is taken as 1: the release notes that it differs from 1 by more
/// than about 2 % only in a very small region around the critical point (roughly
/// 645.91 K < T < 650.77 K and 245.8 kg/m³ < ρ < 405.3 kg/m³, from memory), far from any
/// liquid coolant state. Both double sums are evaluated by Horner's scheme.
///
/// The formulation covers the fluid from the melting line to 1173.15 K at pressures up to
/// 100 MPa (and further, with less accuracy); this function does not check its inputs — range
/// checks belong to [`water`]. Against the iapws Python package 1.5.5 (`_Viscosity`, same
/// formulation) it agrees to 3.1e-14 relative on a 60 × 25 grid over 273.16–1158.16 K and
/// 1–1201 kg/m³.
pub fn water_viscosity(temperature_k: f64, density_kg_m3: f64) -> f64 {
    let t = temperature_k / IAPWS_T_STAR_K;
    let d = density_kg_m3 / IAPWS_RHO_STAR_KG_M3;

    // μ0: Σ H_i · (1/T̄)^i by Horner in 1/T̄.
    let inv_t = 1.0 / t;
    let denom = IAPWS_H0.iter().rev().fold(0.0, |acc, &h| acc * inv_t + h);
    let mu0 = 100.0 * t.sqrt() / denom;

    // μ1: outer Horner in x = 1/T̄ − 1 over rows i, inner Horner in y = ρ̄ − 1 over columns j.
    let x = inv_t - 1.0;
    let y = d - 1.0;
    let sum = IAPWS_H1.iter().rev().fold(0.0, |acc, row| {
        let inner = row.iter().rev().fold(0.0, |a, &h| a * y + h);
        acc * x + inner
    });
    let mu1 = (d * sum).exp();

    // μ2 = 1 (critical enhancement neglected, see above).
    IAPWS_MU_STAR_PA_S * mu0 * mu1
}

// ---------------------------------------------------------------------------------------------
// Thermal conductivity: IAPWS R15-11
// ---------------------------------------------------------------------------------------------

/// Reducing thermal conductivity λ* of IAPWS R15-11, W/(m·K). (T* and ρ* are those of
/// R12-08, [`IAPWS_T_STAR_K`] and [`IAPWS_RHO_STAR_KG_M3`].)
pub const IAPWS_LAMBDA_STAR_W_MK: f64 = 1.0e-3;

/// Coefficients L_k, k = 0..4, of the dilute-gas term λ0 (IAPWS R15-11, table 1; from memory,
/// confirmed against the iapws Python package 1.5.5).
const IAPWS_L0: [f64; 5] = [
    2.443_221e-3,
    1.323_095e-2,
    6.770_357e-3,
    -3.454_586e-3,
    4.096_266e-4,
];

/// Coefficients L_ij, i = 0..4 (rows), j = 0..5 (columns), of the residual term λ1
/// (IAPWS R15-11, table 2; from memory, confirmed against the iapws Python package 1.5.5).
/// Coefficients not listed in the release are zero.
#[rustfmt::skip]
const IAPWS_L1: [[f64; 6]; 5] = [
    //  j = 0           1               2               3               4               5
    [ 1.603_973_57,  -0.646_013_523,  0.111_443_906,  0.102_997_357, -0.050_412_363_4, 0.006_098_592_58],
    [ 2.337_718_42,  -2.788_437_78,   1.536_161_67,  -0.463_045_512,  0.083_282_701_9, -0.007_192_012_45],
    [ 2.196_505_29,  -4.545_807_85,   3.557_772_44,  -1.409_449_78,   0.275_418_278,  -0.020_593_881_6],
    [-1.210_513_78,   1.608_129_89,  -0.621_178_141,  0.071_637_322_4, 0.0,             0.0],
    [-2.720_337_0,    4.575_863_31,  -3.183_692_45,   1.116_834_8,   -0.192_683_05,    0.012_913_842],
];

/// Thermal conductivity of ordinary water substance in W/(m·K) at temperature `temperature_k`
/// (K) and density `density_kg_m3` (kg/m³), by the IAPWS 2011 formulation (IAPWS R15-11).
///
/// With reduced variables T̄ = T/T*, ρ̄ = ρ/ρ* (T* = 647.096 K, ρ* = 322 kg/m³) and
/// λ* = 1 mW/(m·K),
///
/// ```text
/// λ/λ* = λ0(T̄) · λ1(T̄, ρ̄) + λ2(T̄, ρ̄)
/// λ0   = √T̄ / Σ_{k=0}^{4} L_k / T̄^k                                     (dilute gas)
/// λ1   = exp[ ρ̄ Σ_{i=0}^{4} (1/T̄ − 1)^i Σ_{j=0}^{5} L_ij (ρ̄ − 1)^j ]     (residual)
/// λ2   = 0                                                               (critical enhancement)
/// ```
///
/// The critical enhancement λ2 is omitted. In R15-11 it is proportional to a function Z(y) of
/// the correlation length ξ = ξ0 (ΔX̄/Γ0)^(ν/γ), where
/// ΔX̄ = ρ̄ [p_c/ρ_c · (∂ρ/∂p)_T(T, ρ) − (T_R/T) · p_c/ρ_c · (∂ρ/∂p)_T(T_R, ρ)], T_R = 1.5 T_c, and
/// ΔX̄ < 0 is set to 0, which makes λ2 vanish identically. Along the 1-atm liquid line this is
/// the case everywhere in 0–150 °C: evaluated with IAPWS-95 (iapws Python package 1.5.5,
/// liquid root at 0.101325 MPa, every 0.25 K) ΔX̄ stays below −0.0196 over 0–100 °C and below
/// −0.0028 over 100–150 °C, and `IAPWS95(T, P=0.101325).k` (which includes λ2) equals
/// `_ThCond(rho, T)` (λ0·λ1 only) exactly over 0–99.5 °C. So for the states [`water`] serves
/// the omission is exact, not an approximation. Where ΔX̄ > 0 (notably around the critical
/// point) λ2 is positive and this function underestimates λ.
///
/// Both sums are evaluated by Horner's scheme. The formulation covers the fluid from the
/// melting line to 1173.15 K at pressures up to 100 MPa; this function does not check its
/// inputs — range checks belong to [`water`]. Against the iapws Python package 1.5.5
/// (`_ThCond(rho, T)` without phase data, i.e. λ2 = 0) it agrees to 6.8e-14 relative on a
/// 60 × 25 grid over 273.16–1158.16 K and 1–1201 kg/m³.
pub fn water_conductivity(temperature_k: f64, density_kg_m3: f64) -> f64 {
    let t = temperature_k / IAPWS_T_STAR_K;
    let d = density_kg_m3 / IAPWS_RHO_STAR_KG_M3;

    // λ0: Σ L_k · (1/T̄)^k by Horner in 1/T̄.
    let inv_t = 1.0 / t;
    let denom = IAPWS_L0.iter().rev().fold(0.0, |acc, &l| acc * inv_t + l);
    let lambda0 = t.sqrt() / denom;

    // λ1: outer Horner in x = 1/T̄ − 1 over rows i, inner Horner in y = ρ̄ − 1 over columns j.
    let x = inv_t - 1.0;
    let y = d - 1.0;
    let sum = IAPWS_L1.iter().rev().fold(0.0, |acc, row| {
        let inner = row.iter().rev().fold(0.0, |a, &l| a * y + l);
        acc * x + inner
    });
    let lambda1 = (d * sum).exp();

    // λ2 = 0 (critical enhancement omitted, see above).
    IAPWS_LAMBDA_STAR_W_MK * lambda0 * lambda1
}

// ---------------------------------------------------------------------------------------------
// Density: Kell (1975)
// ---------------------------------------------------------------------------------------------

/// Numerator coefficients a_0..a_5 of Kell's density formula (kg/m³ per °C^k), G. S. Kell,
/// J. Chem. Eng. Data 20 (1975) 97, equation for 1 atm (from memory).
const KELL_A: [f64; 6] = [
    999.839_52,
    16.945_176,
    -7.987_040_1e-3,
    -46.170_461e-6,
    105.563_02e-9,
    -280.542_53e-12,
];
/// Denominator coefficient b of Kell's density formula (1/°C), same source (from memory).
const KELL_B: f64 = 16.879_850e-3;
/// Kell's temperatures are on IPTS-68; t68 ≈ 1.00024 · t90 converts an ITS-90 Celsius
/// temperature to it over 0–150 °C (common practice, from memory; the shift is 0.024 K at 100 °C, and applying it cuts
/// the measured deviation from IAPWS-95 threefold, see [`water_density`]).
const IPTS68_PER_ITS90: f64 = 1.000_24;

/// Density of liquid water in kg/m³ at atmospheric pressure (0.101325 MPa) and temperature
/// `temperature_k` (K, ITS-90), by Kell (1975), J. Chem. Eng. Data 20, 97:
///
/// ```text
/// ρ(t) = (a0 + a1 t + a2 t² + a3 t³ + a4 t⁴ + a5 t⁵) / (1 + b t),   t in °C (IPTS-68)
/// ```
///
/// with t = 1.00024 · (T − 273.15 K) converting the ITS-90 input to Kell's IPTS-68 scale. The
/// formula is stated for 0–150 °C; above the normal boiling point it describes liquid at 1 atm
/// (a superheated state), i.e. it ignores the compression of a pressurised passage.
///
/// Measured against IAPWS-95 (iapws Python package 1.5.5, liquid root of the IAPWS-95 equation
/// at 0.101325 MPa, every 0.25 K): maximum relative deviation 4.8e-6 over 0–100 °C and 3.3e-6
/// over 100–150 °C. Without the IPTS-68 conversion the deviation would be 1.5e-5 and 3.8e-5.
/// This function does not check its input — range checks belong to [`water`].
pub fn water_density(temperature_k: f64) -> f64 {
    let t = IPTS68_PER_ITS90 * (temperature_k - CELSIUS_ZERO_K);
    let num = KELL_A.iter().rev().fold(0.0, |acc, &a| acc * t + a);
    num / (1.0 + KELL_B * t)
}

// ---------------------------------------------------------------------------------------------
// Isobaric specific heat: IAPWS-IF97 region 1
// ---------------------------------------------------------------------------------------------

/// Specific gas constant R of IAPWS-IF97, J/(kg·K).
const IF97_R_J_KGK: f64 = 461.526;
/// Reducing pressure p* of IAPWS-IF97 region 1, MPa.
const IF97_R1_P_STAR_MPA: f64 = 16.53;
/// Reducing temperature T* of IAPWS-IF97 region 1, K.
const IF97_R1_T_STAR_K: f64 = 1386.0;
/// Atmospheric pressure, MPa.
const ATMOSPHERE_MPA: f64 = 0.101_325;

/// Exponents I_i, J_i and coefficients n_i, i = 1..34, of the dimensionless Gibbs free energy
/// of IAPWS-IF97 region 1 (IAPWS R7-97(2012), table 2; from memory, confirmed against the
/// iapws Python package 1.5.5).
#[rustfmt::skip]
const IF97_R1: [(i32, i32, f64); 34] = [
    (0, -2,  0.146_329_712_131_67),
    (0, -1, -0.845_481_871_691_14),
    (0,  0, -0.375_636_036_720_40e1),
    (0,  1,  0.338_551_691_683_85e1),
    (0,  2, -0.957_919_633_878_72),
    (0,  3,  0.157_720_385_132_28),
    (0,  4, -0.166_164_171_995_01e-1),
    (0,  5,  0.812_146_299_835_68e-3),
    (1, -9,  0.283_190_801_238_04e-3),
    (1, -7, -0.607_063_015_658_74e-3),
    (1, -1, -0.189_900_682_184_19e-1),
    (1,  0, -0.325_297_487_705_05e-1),
    (1,  1, -0.218_417_171_754_14e-1),
    (1,  3, -0.528_383_579_699_30e-4),
    (2, -3, -0.471_843_210_732_67e-3),
    (2,  0, -0.300_017_807_930_26e-3),
    (2,  1,  0.476_613_939_069_87e-4),
    (2,  3, -0.441_418_453_308_46e-5),
    (2, 17, -0.726_949_962_975_94e-15),
    (3, -4, -0.316_796_448_450_54e-4),
    (3,  0, -0.282_707_979_853_12e-5),
    (3,  6, -0.852_051_281_201_03e-9),
    (4, -5, -0.224_252_819_080_00e-5),
    (4, -2, -0.651_712_228_956_01e-6),
    (4, 10, -0.143_417_299_379_24e-12),
    (5, -8, -0.405_169_968_601_17e-6),
    (8, -11, -0.127_343_017_416_41e-8),
    (8, -6, -0.174_248_712_306_34e-9),
    (21, -29, -0.687_621_312_955_31e-18),
    (23, -31,  0.144_783_078_285_21e-19),
    (29, -38,  0.263_357_816_627_95e-22),
    (30, -39, -0.119_476_226_400_71e-22),
    (31, -40,  0.182_280_945_814_04e-23),
    (32, -41, -0.935_370_872_924_58e-25),
];

/// Isobaric specific heat capacity in J/(kg·K) from the IAPWS-IF97 region 1 (liquid) basic
/// equation at temperature `temperature_k` (K) and pressure `pressure_mpa` (MPa).
///
/// With π = p/p*, τ = T*/T (p* = 16.53 MPa, T* = 1386 K) the dimensionless Gibbs free energy
/// is γ(π, τ) = Σ_{i=1}^{34} n_i (7.1 − π)^{I_i} (τ − 1.222)^{J_i}, and
///
/// ```text
/// c_p = −R τ² γ_ττ,   γ_ττ = Σ n_i (7.1 − π)^{I_i} J_i (J_i − 1) (τ − 1.222)^{J_i − 2}
/// ```
///
/// with R = 0.461526 kJ/(kg·K). The sum is evaluated term by term with integer powers.
fn if97_region1_cp(temperature_k: f64, pressure_mpa: f64) -> f64 {
    let tau = IF97_R1_T_STAR_K / temperature_k;
    let a = 7.1 - pressure_mpa / IF97_R1_P_STAR_MPA;
    let b = tau - 1.222;
    let gamma_tt: f64 = IF97_R1
        .iter()
        .map(|&(i, j, n)| n * a.powi(i) * f64::from(j * (j - 1)) * b.powi(j - 2))
        .sum();
    -IF97_R_J_KGK * tau * tau * gamma_tt
}

/// Isobaric specific heat capacity c_p of liquid water in J/(kg·K) at atmospheric pressure
/// (0.101325 MPa) and temperature `temperature_k` (K), from the basic equation of region 1 of
/// the IAPWS Industrial Formulation 1997 (IAPWS-IF97, release R7-97(2012)):
///
/// ```text
/// c_p = −R τ² γ_ττ,   γ_ττ = Σ_{i=1}^{34} n_i (7.1 − π)^{I_i} J_i (J_i − 1) (τ − 1.222)^{J_i − 2}
/// ```
///
/// with π = p/16.53 MPa, τ = 1386 K/T, R = 0.461526 kJ/(kg·K) and the 34 published
/// coefficients n_i, I_i, J_i.
///
/// Region 1 is stated for p_s(T) ≤ p ≤ 100 MPa, so above the normal boiling point (99.97 °C)
/// the 1-atm state is metastable superheated liquid and the equation is extrapolated a little
/// beyond its boundary. Measured against the scientific formulation IAPWS-95 (iapws Python
/// package 1.5.5, liquid root of IAPWS-95 at 0.101325 MPa, every 0.25 K): maximum relative
/// deviation 5.2e-4 over 0–100 °C (near 60 °C) and 8.1e-4 over 100–150 °C (near 137 °C). Against the
/// package's own IF97 region 1 (`iapws.iapws97._Region1(T, 0.101325)["cp"]`) it agrees to
/// 2.2e-15 relative over 0–150 °C (every 0.25 K). This function does not check its input — range checks
/// belong to [`water`].
pub fn water_specific_heat(temperature_k: f64) -> f64 {
    if97_region1_cp(temperature_k, ATMOSPHERE_MPA)
}

// ---------------------------------------------------------------------------------------------
// Operating points
// ---------------------------------------------------------------------------------------------

/// 0 °C in kelvin.
const CELSIUS_ZERO_K: f64 = 273.15;
/// Lowest supported water temperature, °C.
const WATER_MIN_C: f64 = 0.0;
/// Highest water temperature supported without a warning, °C.
const WATER_WARN_ABOVE_C: f64 = 100.0;
/// Highest supported water temperature (upper end of Kell's formula), °C.
const WATER_MAX_C: f64 = 150.0;
/// Slack on the range edges, °C, so that e.g. `100C` → 373.15 K → 100.000…03 °C is not
/// reported as above 100 °C.
const EDGE_SLACK_C: f64 = 1e-9;

fn supported_range() -> String {
    format!(
        "supported range {WATER_MIN_C:.0}–{WATER_MAX_C:.0} °C \
         (above {WATER_WARN_ABOVE_C:.0} °C with a warning)"
    )
}

/// Properties of liquid water at atmospheric pressure and temperature `temperature_k` (K),
/// with a list of warnings.
///
/// Density comes from [`water_density`] (Kell 1975, 1 atm); viscosity from [`water_viscosity`]
/// (IAPWS R12-08) and thermal conductivity from [`water_conductivity`] (IAPWS R15-11), both at
/// that temperature and density; isobaric specific heat from [`water_specific_heat`]
/// (IAPWS-IF97 region 1 at 0.101325 MPa). Evaluated at Kell's density the conductivity differs
/// from R15-11 at the IAPWS-95 density by at most 9.6e-6 relative over 0–150 °C (iapws Python
/// package 1.5.5, every 0.25 K).
///
/// * 0–100 °C: no warnings. (At 1 atm water boils at 99.97 °C on ITS-90 and melts at about
///   0.0025 °C, both from memory; the slivers beyond are metastable liquid whose properties
///   are continuous, so they are not flagged.)
/// * above 100 °C up to 150 °C: allowed, with warnings that the passage must be pressurised
///   to keep the water liquid while the density is taken at 1 atm, and that such coolant
///   circuits need pressure-rated design. The 1-atm values are close to those of a pressurised
///   liquid: at 150 °C and 1 MPa, IAPWS-95 (iapws 1.5.5) gives a density 0.056 % and a
///   viscosity 0.13 % above the values returned here.
/// * below 0 °C, above 150 °C, or not finite: [`Error::Fluid`].
pub fn water(temperature_k: f64) -> Result<(FluidProperties, Vec<String>)> {
    let t_c = temperature_k - CELSIUS_ZERO_K;
    if !temperature_k.is_finite() {
        return Err(Error::Fluid(format!(
            "water temperature {t_c} °C is not a finite number; the {}",
            supported_range()
        )));
    }
    if !((WATER_MIN_C - EDGE_SLACK_C)..=(WATER_MAX_C + EDGE_SLACK_C)).contains(&t_c) {
        return Err(Error::Fluid(format!(
            "water temperature {t_c:.2} °C ({temperature_k:.2} K) is outside the {}",
            supported_range()
        )));
    }

    let mut warnings = Vec::new();
    if t_c > WATER_WARN_ABOVE_C + EDGE_SLACK_C {
        warnings.push(format!(
            "water at {t_c:.1} °C: water boils at 100 °C at atmospheric pressure, so the \
             passage must be pressurised to keep it liquid; the density correlation is taken \
             at 1 atm (Kell 1975), which slightly underestimates the density and viscosity of \
             the pressurised liquid"
        ));
        warnings.push(
            "coolant temperatures above the boiling point demand a pressure-rated design of the \
             circuit to the applicable local codes"
                .to_string(),
        );
    }

    let density = water_density(temperature_k);
    let viscosity = water_viscosity(temperature_k, density);
    let conductivity = water_conductivity(temperature_k, density);
    let specific_heat = water_specific_heat(temperature_k);
    Ok((
        FluidProperties {
            name: "water".to_string(),
            viscosity_pa_s: viscosity,
            density_kg_m3: density,
            temperature_k: Some(temperature_k),
            conductivity_w_mk: Some(conductivity),
            specific_heat_j_kgk: Some(specific_heat),
            source: "viscosity IAPWS R12-08 (critical enhancement neglected); \
                     density Kell (1975) at 1 atm; \
                     thermal conductivity IAPWS R15-11 (critical enhancement, zero here, omitted); \
                     specific heat IAPWS-IF97 region 1 at 1 atm"
                .to_string(),
        },
        warnings,
    ))
}

/// Properties of the fluid called `name` (case-insensitive; see [`KNOWN_FLUIDS`]) at
/// `temperature_k` (K), with warnings. Water needs a temperature.
pub fn by_name(name: &str, temperature_k: Option<f64>) -> Result<(FluidProperties, Vec<String>)> {
    let key = name.trim();
    if key.eq_ignore_ascii_case("water") {
        match temperature_k {
            Some(t) => water(t),
            None => Err(Error::Fluid(
                "water needs a temperature: give --temperature (e.g. --temperature 20C)"
                    .to_string(),
            )),
        }
    } else {
        Err(Error::Fluid(format!(
            "unknown fluid '{key}' (known fluids: {})",
            KNOWN_FLUIDS.join(", ")
        )))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rel(a: f64, b: f64) -> f64 {
        (a / b - 1.0).abs()
    }

    #[test]
    fn iapws_r12_08_check_values() {
        // IAPWS R12-08 check values for μ0·μ1 with μ2 = 1, in µPa·s (from memory, confirmed with
        // the iapws Python package version 1.5.5, `iapws._iapws._Viscosity(rho, T)`, which
        // reproduces all eleven to the printed digits).
        let cases: [(f64, f64, f64); 11] = [
            (298.15, 998.0, 889.735_100),
            (298.15, 1200.0, 1_437.649_467),
            (373.15, 1000.0, 307.883_622),
            (433.15, 1.0, 14.538_324),
            (433.15, 1000.0, 217.685_358),
            (873.15, 1.0, 32.619_287),
            (873.15, 100.0, 35.802_262),
            (873.15, 600.0, 77.430_195),
            (1173.15, 1.0, 44.217_245),
            (1173.15, 100.0, 47.640_433),
            (1173.15, 400.0, 64.154_608),
        ];
        for (t, rho, mu_upa_s) in cases {
            let mu = water_viscosity(t, rho) * 1e6;
            assert!(
                rel(mu, mu_upa_s) < 1e-6,
                "T = {t} K, ρ = {rho}: {mu} µPa·s vs {mu_upa_s}"
            );
        }
    }

    #[test]
    fn one_atmosphere_liquid_line() {
        // (T in K, μ in Pa·s, ρ in kg/m³) of liquid water at 0.101325 MPa, produced once with
        // the iapws Python package version 1.5.5: `IAPWS95(T=T, P=0.101325)` (density from
        // IAPWS-95; `.mu` is IAPWS R12-08 at that density).
        // Tolerances: Kell (1975) deviates from IAPWS-95 by at most 4.8e-6 over 0–100 °C and the
        // viscosity, evaluated at Kell's density, by at most 8.8e-6 (both measured every 0.25 K
        // with the same package); the asserts allow about twice that.
        let cases: [(f64, f64, f64); 8] = [
            (273.15, 1.791_756_178_5e-3, 999.843_086),
            (283.15, 1.305_899_660_4e-3, 999.702_470),
            (293.15, 1.001_596_143_1e-3, 998.207_150),
            (298.15, 8.900_224_890_8e-4, 997.047_637),
            (313.15, 6.527_287_265_8e-4, 992.216_353),
            (333.15, 4.660_350_780_9e-4, 983.195_824),
            (353.15, 3.540_506_538_8e-4, 971.790_398),
            (372.15, 2.845_653_321_7e-4, 959.066_060),
        ];
        for (t, mu, rho) in cases {
            let (p, warnings) = water(t).unwrap();
            assert!(warnings.is_empty(), "T = {t}: {warnings:?}");
            assert!(
                rel(p.density_kg_m3, rho) < 1e-5,
                "T = {t}: ρ {}",
                p.density_kg_m3
            );
            assert!(
                rel(p.viscosity_pa_s, mu) < 2e-5,
                "T = {t}: μ {}",
                p.viscosity_pa_s
            );
            assert_eq!(p.temperature_k, Some(t));
            assert_eq!(p.name, "water");
        }
    }

    #[test]
    fn above_boiling_at_one_atmosphere() {
        // Liquid root of IAPWS-95 at 0.101325 MPa (superheated liquid) and R12-08 viscosity at
        // it, produced once with the iapws Python package version 1.5.5. Kell's 1-atm formula
        // reproduces this state to 3.3e-6 in density (measured every 0.25 K, 100–150 °C).
        for (t, mu, rho) in [
            (398.15, 2.220_647_127_6e-4, 938.956_984),
            (423.15, 1.825_148_928_3e-4, 916.794_310),
        ] {
            let (p, warnings) = water(t).unwrap();
            assert!(rel(p.density_kg_m3, rho) < 1e-5, "ρ {}", p.density_kg_m3);
            assert!(rel(p.viscosity_pa_s, mu) < 2e-5, "μ {}", p.viscosity_pa_s);
            assert_eq!(warnings.len(), 2);
            assert!(warnings[0].contains("boils at 100 °C"));
            assert!(warnings[0].contains("pressurised"));
            assert!(warnings[0].contains("1 atm"));
            assert!(warnings[1].contains("pressure-rated"));
            assert!(warnings[1].contains("local codes"));
        }
    }

    #[test]
    fn iapws_r15_11_check_values() {
        // IAPWS R15-11 check values for λ0·λ1 with λ2 = 0, in mW/(m·K) (from memory, confirmed
        // with the iapws Python package version 1.5.5, `iapws._iapws._ThCond(rho, T)` without
        // phase data, which reproduces all four to the printed digits).
        let cases: [(f64, f64, f64); 4] = [
            (298.15, 0.0, 18.434_188_3),
            (298.15, 998.0, 607.712_868),
            (298.15, 1200.0, 799.038_144),
            (873.15, 0.0, 79.103_465_9),
        ];
        for (t, rho, k_mw) in cases {
            let k = water_conductivity(t, rho) * 1e3;
            assert!(
                rel(k, k_mw) < 1e-6,
                "T = {t} K, ρ = {rho}: {k} mW/(m·K) vs {k_mw}"
            );
        }
    }

    #[test]
    fn iapws_if97_region1_cp_check_values() {
        // IAPWS-IF97 (R7-97(2012)) table 5, c_p of region 1 in kJ/(kg·K) (from memory,
        // confirmed with the iapws Python package version 1.5.5, `iapws.iapws97._Region1(T, P)`).
        for (t, p_mpa, cp_kj) in [
            (300.0, 3.0, 4.173_012_18),
            (300.0, 80.0, 4.010_089_87),
            (500.0, 3.0, 4.655_806_82),
        ] {
            let cp = if97_region1_cp(t, p_mpa) / 1e3;
            assert!(rel(cp, cp_kj) < 1e-8, "T = {t} K, p = {p_mpa} MPa: {cp}");
        }
    }

    #[test]
    fn one_atmosphere_heat_transfer_properties() {
        // (T in K, k in W/(m·K), c_p(IF97) and c_p(IAPWS-95) in J/(kg·K)) of liquid water at
        // 0.101325 MPa, produced once with the iapws Python package version 1.5.5:
        // k = `IAPWS95(T=T, P=0.101325).k` (R15-11 with its critical enhancement, which is zero
        // here, at the IAPWS-95 density); c_p(IF97) = 1000 · `IAPWS97(T=T, P=0.101325).cp`
        // (region 1); c_p(IAPWS-95) = 1000 · `IAPWS95(T=T, P=0.101325).cp`.
        // Tolerances: k is evaluated at Kell's density, which moves it by at most 9.6e-6 (measured
        // every 0.25 K with the same package), allowed 2e-5; c_p is the same IF97 equation,
        // allowed 1e-9; IF97 region 1 deviates from IAPWS-95 by at most 5.2e-4 over 0–100 °C
        // (measured every 0.25 K), allowed 1e-3.
        let cases: [(f64, f64, f64, f64); 8] = [
            (273.15, 0.555_649_662_31, 4_219.430_340_2, 4_219.444_808_5),
            (283.15, 0.578_777_401_01, 4_195.445_939_7, 4_195.158_886_0),
            (293.15, 0.598_012_355_52, 4_184.794_094_8, 4_184.050_924_5),
            (298.15, 0.606_516_080_22, 4_181.896_233_5, 4_181.314_990_8),
            (313.15, 0.628_485_695_90, 4_178.552_593_0, 4_179.414_798_0),
            (333.15, 0.651_000_282_86, 4_182.763_550_3, 4_184.953_280_5),
            (353.15, 0.666_994_312_86, 4_195.515_554_5, 4_196.753_264_4),
            (372.15, 0.676_828_204_29, 4_215.385_836_4, 4_214.528_625_2),
        ];
        for (t, k, cp97, cp95) in cases {
            let (p, _) = water(t).unwrap();
            let pk = p.conductivity_w_mk.unwrap();
            let pcp = p.specific_heat_j_kgk.unwrap();
            assert!(rel(pk, k) < 2e-5, "T = {t}: k {pk}");
            assert!(rel(pcp, cp97) < 1e-9, "T = {t}: c_p {pcp}");
            assert!(rel(pcp, cp95) < 1e-3, "T = {t}: c_p {pcp} vs IAPWS-95");
            assert_eq!(pcp, water_specific_heat(t));
        }
        // Above boiling (metastable liquid at 1 atm): R15-11 at the liquid root of IAPWS-95 and
        // IAPWS-95 c_p there, from the same package (liquid root found by Newton iteration on
        // the IAPWS-95 pressure); IF97 region 1, extrapolated, deviates by at most 8.1e-4 over
        // 100–150 °C (measured every 0.25 K).
        for (t, k, cp95) in [
            (398.15, 0.682_660_110_17, 4_252.483_225_4),
            (423.15, 0.680_760_773_99, 4_308.302_562_5),
        ] {
            let (p, _) = water(t).unwrap();
            let pk = p.conductivity_w_mk.unwrap();
            let pcp = p.specific_heat_j_kgk.unwrap();
            assert!(rel(pk, k) < 2e-5, "T = {t}: k {pk}");
            assert!(rel(pcp, cp95) < 1e-3, "T = {t}: c_p {pcp}");
        }
    }

    #[test]
    fn prandtl_number() {
        // Pr of water at 20 °C and 1 atm is about 7.0 (from memory; IAPWS95(T=293.15,
        // P=0.101325).Prandt in the iapws Python package 1.5.5 gives 7.0078).
        let (p, _) = water(293.15).unwrap();
        let pr = p.prandtl().unwrap();
        assert!(rel(pr, 7.0) < 0.02, "Pr = {pr}");

        let user = FluidProperties {
            name: "user-defined fluid".to_string(),
            viscosity_pa_s: 1e-3,
            density_kg_m3: 1000.0,
            temperature_k: None,
            conductivity_w_mk: None,
            specific_heat_j_kgk: Some(4000.0),
            source: String::new(),
        };
        assert_eq!(user.prandtl(), None);
    }

    #[test]
    fn range_edges_and_errors() {
        // Edges as the unit parser produces them (°C + 273.15) are inside and silent.
        assert!(water(0.0 + 273.15).unwrap().1.is_empty());
        assert!(water(100.0 + 273.15).unwrap().1.is_empty());
        assert_eq!(water(150.0 + 273.15).unwrap().1.len(), 2);
        assert_eq!(water(100.5 + 273.15).unwrap().1.len(), 2);

        for (t, shown) in [(272.15, "-1.00 °C"), (424.15, "151.00 °C")] {
            match water(t) {
                Err(Error::Fluid(m)) => {
                    assert!(m.contains(shown), "{m}");
                    assert!(m.contains("0–150 °C"), "{m}");
                }
                other => panic!("expected a fluid error, got {other:?}"),
            }
        }
        for t in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY] {
            match water(t) {
                Err(Error::Fluid(m)) => {
                    assert!(m.contains("not a finite number"), "{m}");
                    assert!(m.contains("0–150 °C"), "{m}");
                }
                other => panic!("expected a fluid error, got {other:?}"),
            }
        }
    }

    #[test]
    fn lookup_by_name() {
        let (p, w) = by_name(" Water ", Some(293.15)).unwrap();
        assert_eq!(p, water(293.15).unwrap().0);
        assert!(w.is_empty());
        assert!(p.source.contains("IAPWS R12-08") && p.source.contains("Kell (1975)"));
        assert!(p.source.contains("IAPWS R15-11") && p.source.contains("IAPWS-IF97"));
        assert!(by_name("WATER", Some(300.0)).is_ok());

        match by_name("water", None) {
            Err(Error::Fluid(m)) => assert!(m.contains("--temperature"), "{m}"),
            other => panic!("expected a fluid error, got {other:?}"),
        }
        match by_name("glycol", Some(300.0)) {
            Err(Error::Fluid(m)) => {
                assert!(m.contains("'glycol'"), "{m}");
                assert!(m.contains("known fluids: water"), "{m}");
            }
            other => panic!("expected a fluid error, got {other:?}"),
        }
    }
}
