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
