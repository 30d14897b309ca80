// Flat ΛCDM with radiation; linear P(k) from the Eisenstein & Hu (1998)
// transfer function normalised to σ8. All lengths in Mpc (not Mpc/h), masses
// in solar masses, k in 1/Mpc. Defaults: Planck 2018 TT,TE,EE+lowE+lensing.
#pragma once
#include <memory>

#include "core/config.hpp"

namespace spinflip::cosmo {

inline constexpr double nu21_MHz = 1420.405751768;  // hyperfine rest frequency
inline constexpr double c_km_s = 299792.458;

struct Parameters {
  double h = 0.6766;
  double omega_m = 0.3111;   // total matter today (CDM + baryons)
  double omega_b = 0.04897;  // baryons today
  double n_s = 0.9665;
  double sigma8 = 0.8102;
  double T_cmb_K = 2.7255;
  double n_eff = 3.046;  // effective neutrino number (radiation density, massless)
  bool baryon_wiggles = true;  // false: the E&H no-wiggle transfer function
};

/// Declare the [cosmology] keys; read them back.
void declare_keys(core::Schema& schema);
Parameters parameters_from(const core::Config& config);

class Cosmology {
 public:
  explicit Cosmology(const Parameters& p = Parameters{});
  Cosmology(const Cosmology&);
  Cosmology& operator=(const Cosmology&);
  ~Cosmology();
  const Parameters& parameters() const;

  double omega_r() const;        // photons + massless neutrinos today
  double omega_lambda() const;   // 1 - Ωm - Ωr (flat)
  double E(double z) const;      // H(z)/H0
  double hubble_km_s_mpc(double z) const;
  double comoving_distance_mpc(double z) const;
  double redshift_at_comoving_distance(double d_mpc) const;
  double angular_diameter_distance_mpc(double z) const;
  double omega_m_at(double z) const;
  double growth_factor(double z) const;  // linear D(z), D(0) = 1 (ODE with radiation)
  double growth_rate(double z) const;    // f = dlnD/dlna

  double sound_horizon_mpc() const;  // E&H (1998) eq. 6
  double k_silk_mpc() const;         // E&H (1998) eq. 7
  double transfer(double k_mpc) const;
  double linear_power(double k_mpc, double z = 0.0) const;  // Mpc^3
  double sigma_R(double r_mpc, double z = 0.0) const;       // top hat
  double mean_matter_density_msun_mpc3() const;             // comoving, today
  double mass_of_radius(double r_mpc) const;                // M = 4π/3 ρ̄ R³
  double radius_of_mass(double m_msun) const;
  double sigma_M(double m_msun, double z = 0.0) const;
  /// dσ²/dM at z=0 (for mass functions), numerically from the tabulation.
  double dsigma2_dM(double m_msun) const;

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

double frequency_MHz(double z);
double redshift_at_frequency(double nu_MHz);

/// Barkana & Loeb (2001) eq. 26: halo mass of virial temperature T at z
/// (mean molecular weight mu: 0.59 ionized, 1.22 neutral).
double virial_mass_msun(double T_vir_K, double z, const Cosmology& c, double mu = 0.59);
double virial_temperature_K(double m_msun, double z, const Cosmology& c, double mu = 0.59);

/// Furlanetto, Oh & Briggs (2006) eq. 1 prefactor, T_S >> T_CMB, x_HI = 1, δ = 0:
/// 27 mK (Ωb h²/0.023) [0.15/(Ωm h²) (1+z)/10]^½.
double tb_prefactor_mK(double z, const Cosmology& c);

}  // namespace spinflip::cosmo
