// Internal: the atomic and thermal physics of the 21-cm spin temperature at
// cosmic dawn, cell by cell (no fields, no MPI): collisional and Wouthuysen–Field
// coupling, T_S, X-ray cross sections and energy deposition, the Lyman-series
// cascade. Sources are named beside each definition in spin_temperature.cpp and
// in docs/lightcone.md ("Spin temperature").
#pragma once
#include <array>
#include <cstddef>

namespace spinflip::sim::detail {

// Constants (CGS unless the name says otherwise).
inline constexpr double t_star_K = 0.0682;         // hν21/k_B
inline constexpr double a10_per_s = 2.85e-15;      // Einstein A of the 21-cm line
inline constexpr double nu_lyman_limit_Hz = 3.2898419603e15;  // Rydberg frequency (13.6057 eV / h)
inline constexpr double e_hi_keV = 13.6057e-3, e_hei_keV = 24.5874e-3;  // ionization thresholds
inline constexpr double k_boltzmann = 1.380649e-16;  // erg/K
inline constexpr double kev_erg = 1.602176634e-9;
inline constexpr double helium_per_hydrogen = 0.0789;  // n_He/n_H for Y_p ≈ 0.24 (common practice)
inline constexpr double hydrogen_mass_fraction = 0.76;

/// Highest Lyman-n line whose photons are followed (Pritchard & Furlanetto 2006 stop at 23).
inline constexpr int lyman_n_max = 23;
/// Fraction of Lyman-n photons that cascade through Lyman-α (Pritchard & Furlanetto 2006, Table 1).
double lyman_recycling_fraction(int n);
/// Frequency of Lyman-n (n ≥ 2): ν_LL (1 − 1/n²).
double lyman_frequency_Hz(int n);

/// Spin-exchange rate coefficient κ_10 of H–H collisions, cm³ s⁻¹ (Zygelman 2005 as tabulated by
/// Furlanetto, Oh & Briggs 2006 Table 2), log–log interpolated; power laws beyond the table.
double kappa_hh_cm3_s(double T_K);
/// e–H (Furlanetto & Furlanetto 2007 fit, as in Kuhlen, Madau & Montgomery 2006) and p–H rates.
double kappa_eh_cm3_s(double T_K);
double kappa_ph_cm3_s(double T_K);
/// Collisional coupling x_c = T_* /(A10 T_γ) Σ_i κ_i n_i for a gas of n_H hydrogen per cm³ with
/// ionized fraction x_e (n_HI = (1 − x_e) n_H, n_e = n_p = x_e n_H).
double collisional_coupling(double T_K, double T_cmb_K, double n_h_cm3, double x_e);

/// x_α per unit Lyman-α intensity J_α (cm⁻² s⁻¹ Hz⁻¹ sr⁻¹) before the correction S_α:
/// 16π² T_* e² f_α / (27 A10 T_γ m_e c) (Madau, Meiksin & Rees 1997; Furlanetto, Oh & Briggs 2006).
double x_alpha_per_intensity(double T_cmb_K);

/// Spin temperature with the Wouthuysen–Field correction S_α and colour temperature of Hirata
/// (2006, eqs. 40 and 42): T_S⁻¹ = (T_γ⁻¹ + x_α T_c⁻¹ + x_c T_K⁻¹)/(1 + x_α + x_c), x_α = x̃_α S_α.
/// tau_gp: Gunn–Peterson optical depth of the Lyman-α line.
struct SpinState {
  double T_s_K, x_alpha;
};
SpinState spin_temperature(double T_K, double T_cmb_K, double x_alpha_tilde, double x_c, double tau_gp);
/// τ_GP = 3×10⁵ x_HI (1+δ) [(1+z)/7]^{3/2} (common practice).
double gunn_peterson_depth(double z, double neutral_density);

/// Photo-ionization cross sections of H I and He I, cm² (Verner et al. 1996 fits), E in keV.
double sigma_hi_cm2(double E_keV);
double sigma_hei_cm2(double E_keV);

/// Fraction of a fast electron's energy left as heat and spent on H ionizations in a gas of
/// ionized fraction x_e (Shull & van Steenberg 1985, high-energy fits).
double heat_fraction(double x_e);
double ionization_fraction(double x_e);

/// Case-B recombination coefficient of hydrogen, cm³ s⁻¹ (2.6×10⁻¹³ (T/10⁴ K)^−0.7, common practice).
double recombination_case_b(double T_K);

/// Compton coupling rate coefficient 8 σ_T a_r T_γ⁴ / (3 m_e c), s⁻¹.
double compton_rate_per_s(double T_cmb_K);

}  // namespace spinflip::sim::detail
