//! Kinetic theory of one ideal gas: number density, molecular speeds, mean
//! free path, wall impingement rate and time to a monolayer.
//!
//! All functions take SI values and are pure.

use super::constants::K_B;
use std::f64::consts::PI;

/// Number density n = p/(k_B T), 1/m³.
pub fn number_density(pressure_pa: f64, temperature_k: f64) -> f64 {
    pressure_pa / (K_B * temperature_k)
}

/// Mean speed of the Maxwell–Boltzmann distribution, v̄ = √(8 k_B T/(π m)), m/s.
pub fn mean_speed(temperature_k: f64, mass_kg: f64) -> f64 {
    (8.0 * K_B * temperature_k / (PI * mass_kg)).sqrt()
}

/// Most probable speed, √(2 k_B T/m), m/s.
pub fn most_probable_speed(temperature_k: f64, mass_kg: f64) -> f64 {
    (2.0 * K_B * temperature_k / mass_kg).sqrt()
}

/// Root-mean-square speed, √(3 k_B T/m), m/s.
pub fn rms_speed(temperature_k: f64, mass_kg: f64) -> f64 {
    (3.0 * K_B * temperature_k / mass_kg).sqrt()
}

/// Hard-sphere mean free path of a pure gas, λ = k_B T/(√2 π d² p), m.
pub fn mean_free_path(pressure_pa: f64, temperature_k: f64, diameter_m: f64) -> f64 {
    K_B * temperature_k / (std::f64::consts::SQRT_2 * PI * diameter_m * diameter_m * pressure_pa)
}

/// Sutherland's temperature-dependent collision diameter:
/// d(T)² = d_ref² (1 + S/T)/(1 + S/T_ref).
pub fn sutherland_diameter(diameter_ref_m: f64, t_ref_k: f64, sutherland_k: f64, t_k: f64) -> f64 {
    diameter_ref_m * ((1.0 + sutherland_k / t_k) / (1.0 + sutherland_k / t_ref_k)).sqrt()
}

/// Wall impingement rate (Hertz–Knudsen), Φ = p/√(2π m k_B T) = n v̄/4,
/// molecules per m² per s.
pub fn impingement_rate(pressure_pa: f64, temperature_k: f64, mass_kg: f64) -> f64 {
    pressure_pa / (2.0 * PI * mass_kg * K_B * temperature_k).sqrt()
}

/// Time to form one monolayer, τ = N_s/(s Φ), s, for `sites_per_m2` adsorption
/// sites and sticking coefficient `sticking`.
pub fn monolayer_time(sites_per_m2: f64, sticking: f64, impingement_per_m2_s: f64) -> f64 {
    sites_per_m2 / (sticking * impingement_per_m2_s)
}

/// Most probable speed of a mixture: the mode of the number-weighted sum of
/// the species' Maxwell–Boltzmann speed distributions,
/// f(v) = Σ x_i 4π (a_i/π)^{3/2} v² exp(−a_i v²), a_i = m_i/(2 k_B T), m/s.
///
/// `species` holds (number fraction, molecular mass in kg). The mode lies
/// between the smallest and largest species' modes (below all of them every
/// term rises, above all of them every term falls). The sum may have several
/// peaks (H2 with Xe), so the interval is first scanned on a logarithmic grid
/// and the best grid point refined by golden-section search in its bracket.
pub fn mixture_most_probable_speed(temperature_k: f64, species: &[(f64, f64)]) -> f64 {
    let modes = species
        .iter()
        .map(|&(_, m)| most_probable_speed(temperature_k, m));
    let lo = modes.clone().fold(f64::INFINITY, f64::min);
    let hi = modes.fold(0.0, f64::max);
    if !(lo.is_finite() && lo > 0.0 && hi >= lo) {
        return f64::NAN;
    }
    if hi - lo <= 1e-12 * hi {
        return hi;
    }
    // The density up to the common factor 4/√π: Σ x_i a_i^{3/2} v² e^{−a_i v²}.
    let density = |v: f64| -> f64 {
        species
            .iter()
            .map(|&(x, m)| {
                let a = m / (2.0 * K_B * temperature_k);
                x * a.powf(1.5) * v * v * (-a * v * v).exp()
            })
            .sum()
    };
    const GRID: usize = 400;
    let ratio = (hi / lo).powf(1.0 / GRID as f64);
    let grid = |k: usize| {
        if k == GRID {
            hi
        } else {
            lo * ratio.powi(k as i32)
        }
    };
    let best = (0..=GRID)
        .max_by(|&i, &j| density(grid(i)).total_cmp(&density(grid(j))))
        .unwrap_or(0);
    let (mut a, mut b) = (grid(best.saturating_sub(1)), grid((best + 1).min(GRID)));
    // Golden-section search for the maximum on [a, b].
    let g = (5f64.sqrt() - 1.0) / 2.0;
    let (mut c, mut d) = (b - g * (b - a), a + g * (b - a));
    let (mut fc, mut fd) = (density(c), density(d));
    for _ in 0..200 {
        if b - a <= 1e-13 * b {
            break;
        }
        if fc >= fd {
            b = d;
            d = c;
            fd = fc;
            c = b - g * (b - a);
            fc = density(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + g * (b - a);
            fd = density(d);
        }
    }
    0.5 * (a + b)
}
