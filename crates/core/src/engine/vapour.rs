//! Saturation vapour pressure of condensable species, for the
//! `above-saturation` warning: a partial pressure above it cannot stay in the
//! gas phase at that temperature (it condenses on the walls).
//!
//! Water only; other species in the gas table condense far below the
//! temperatures the tool is fitted for (273–500 K).

/// Critical temperature of water, K (IAPWS, Wagner & Pruss 1993).
const TC_K: f64 = 647.096;
/// Critical pressure of water, Pa (IAPWS, Wagner & Pruss 1993).
const PC_PA: f64 = 22.064e6;
/// Triple-point temperature of water, K (IAPWS 2011 sublimation release).
const TT_K: f64 = 273.16;
/// Triple-point pressure of water, Pa (IAPWS 2011 sublimation release).
const PT_PA: f64 = 611.657;
/// Lowest temperature of the sublimation equation's validity, K.
const SUBLIMATION_MIN_K: f64 = 50.0;

/// A saturation pressure and the correlation it came from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Saturation {
    /// Pa.
    pub pressure_pa: f64,
    /// The correlation, for messages.
    pub source: &'static str,
}

/// Saturation vapour pressure of `gas_id` at `t_k`, or `None` when the gas
/// has no correlation here or `t_k` is outside its validity (above the
/// critical point nothing condenses).
pub fn saturation(gas_id: &str, t_k: f64) -> Option<Saturation> {
    // Each equation stays behind its tests: the optimiser, which takes
    // `powf` and `exp` for free of side effects, had worked both of them
    // out for every gas and temperature and picked one afterwards (a third
    // of the kinetics' cost at a new temperature). Hence `inline(never)`.
    if gas_id != "H2O" {
        None
    } else if (TT_K..=TC_K).contains(&t_k) {
        Some(Saturation {
            pressure_pa: water_liquid(t_k),
            source: "Wagner & Pruss (1993) saturation equation, IAPWS",
        })
    } else if (SUBLIMATION_MIN_K..TT_K).contains(&t_k) {
        Some(Saturation {
            pressure_pa: water_ice(t_k),
            source: "IAPWS 2011 sublimation equation of ice Ih",
        })
    } else {
        None
    }
}

/// Vapour pressure over liquid water, 273.16–647.096 K:
/// ln(p/p_c) = (T_c/T)(a1 τ + a2 τ^1.5 + a3 τ³ + a4 τ^3.5 + a5 τ⁴ + a6 τ^7.5),
/// τ = 1 − T/T_c.
// Source: W. Wagner and A. Pruss, "International equations for the
// saturation properties of ordinary water substance. Revised according to
// the international temperature scale of 1990", J. Phys. Chem. Ref. Data 22
// (1993) 783; IAPWS supplementary release (1992). Valid from the triple
// point to the critical point.
#[inline(never)]
fn water_liquid(t_k: f64) -> f64 {
    const A: [f64; 6] = [
        -7.859_517_83,
        1.844_082_59,
        -11.786_649_7,
        22.680_741_1,
        -15.961_871_9,
        1.801_225_02,
    ];
    let tau = 1.0 - t_k / TC_K;
    let sum = A[0] * tau
        + A[1] * tau.powf(1.5)
        + A[2] * tau.powi(3)
        + A[3] * tau.powf(3.5)
        + A[4] * tau.powi(4)
        + A[5] * tau.powf(7.5);
    PC_PA * (TC_K / t_k * sum).exp()
}

/// Sublimation pressure over ice Ih, 50–273.16 K:
/// ln(p/p_t) = θ⁻¹ Σ a_i θ^b_i, θ = T/T_t.
// Source: W. Wagner, T. Riethmann, R. Feistel and A. H. Harvey, "New
// equations for the sublimation pressure and melting pressure of H2O ice
// Ih", J. Phys. Chem. Ref. Data 40 (2011) 043103; IAPWS revised release
// on the pressure along the melting and sublimation curves (2011).
#[inline(never)]
fn water_ice(t_k: f64) -> f64 {
    const A: [f64; 3] = [-0.212_144_006e2, 0.273_203_819e2, -0.610_598_130e1];
    const B: [f64; 3] = [0.333_333_333e-2, 0.120_666_667e1, 0.170_333_333e1];
    let theta = t_k / TT_K;
    let sum: f64 = A.iter().zip(B).map(|(a, b)| a * theta.powf(b)).sum();
    PT_PA * (sum / theta).exp()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn psat(t_k: f64) -> f64 {
        saturation("H2O", t_k).map_or(f64::NAN, |s| s.pressure_pa)
    }

    #[test]
    fn water_at_22_c_matches_reference_libraries() {
        // (b) tests/reference/water_saturation.py: chemicals 1.5.2
        // iapws92_Psat(295.15 K) = 2645.2231277 Pa (the same equation), and
        // CoolProp 8.0.0 full IAPWS-95, 2645.3435 Pa (4.5e-5 apart).
        assert!((psat(295.15) - 2645.2231277).abs() / 2645.22 < 1e-7);
        assert!((psat(295.15) - 2645.3435).abs() / 2645.34 < 1e-4);
        // (b) same script: 293.15 K 2339.1937 Pa, 373.15 K 101417.994 Pa
        // (the normal boiling point is 373.124 K on ITS-90).
        assert!((psat(293.15) - 2339.1937).abs() / 2339.19 < 1e-7);
        assert!((psat(373.15) - 101_417.994).abs() / 101_418.0 < 1e-7);
    }

    #[test]
    fn ice_matches_the_iapws_2011_check_values() {
        // (b) tests/reference/water_saturation.py: chemicals 1.5.2
        // iapws11_Psub: 230 K 8.947352740 Pa (also the release's own check
        // value, from memory), 250 K 76.01267 Pa, 200 K 0.1626040 Pa.
        assert!((psat(230.0) - 8.947_352_740).abs() / 8.947 < 1e-7);
        assert!((psat(250.0) - 76.012_669_5).abs() / 76.01 < 1e-7);
        assert!((psat(200.0) - 0.162_604_017_6).abs() / 0.1626 < 1e-7);
        // Both equations meet at the triple point (611.657 Pa, IAPWS 2011).
        assert!((psat(273.16) - 611.657).abs() < 0.01);
        assert!((water_ice(273.16) - 611.657).abs() < 1e-6);
    }

    #[test]
    fn no_value_outside_validity_or_for_other_gases() {
        assert_eq!(saturation("H2O", 700.0), None);
        assert_eq!(saturation("H2O", 20.0), None);
        assert_eq!(saturation("N2", 77.0), None);
    }
}
