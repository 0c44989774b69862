//! Physical constants, SI.

/// Boltzmann constant k_B, J/K (exact, SI 2019).
pub const K_B: f64 = 1.380_649e-23;
/// Avogadro constant N_A, 1/mol (exact, SI 2019).
pub const N_A: f64 = 6.022_140_76e23;
/// Atomic mass constant m_u, kg (CODATA 2018).
pub const M_U: f64 = 1.660_539_066_60e-27;

/// Mass of one molecule, kg, from the molar mass in g/mol (= relative
/// molecular mass × m_u).
pub fn molecular_mass(molar_mass_g_mol: f64) -> f64 {
    molar_mass_g_mol * M_U
}
