// Light-cone generator (DESIGN.md §3, §4): Gaussian initial conditions from the
// linear P(k), linear growth along the line of sight, linear velocity-gradient
// term, excursion-set reionization through a per-cell reionization redshift,
// and the 21-cm brightness temperature. Works on one rank (MPI_COMM_SELF) or on
// a rank group sharing FFTW-MPI slabs of axis 0. Method notes: docs/lightcone.md.
#pragma once
#include <mpi.h>

#include <array>
#include <cstddef>
#include <optional>
#include <vector>

#include "core/array.hpp"
#include "core/config.hpp"
#include "core/rng.hpp"

namespace spinflip::cosmo { class Cosmology; }

namespace spinflip::sim {

/// Declare the [cone], [sources], [spin_temperature] and [tanh_spin_approximation] keys.
void declare_keys(core::Schema& schema);

enum class SourceModel { constant, mass_dependent };

/// Approximation: one global history of Lyman-alpha coupling and gas heating (tanh steps),
/// no fluctuations of T_S. SpinTemperatureModel is the physical model.
struct TanhSpinApproximation {
  bool enabled = false;  // false: T_S >> T_CMB everywhere
  double coupling_redshift = 17.0, coupling_width = 2.0, coupling_strength = 30.0;
  double heating_redshift = 11.0, heating_width = 1.5, heating_temperature_K = 500.0;
  double spin_temperature_K(double z, double T_cmb0_K) const;
};

/// Spin temperature cell by cell (docs/lightcone.md "Spin temperature"): Lyman-α coupling from
/// the Lyman-series background and X-ray heating and ionization of the neutral gas, from the
/// sources' star-formation rate density summed over shells at the retarded redshift.
struct SpinTemperatureModel {
  bool enabled = false;  // false: T_S >> T_CMB (unless the tanh approximation is on)
  double xray_luminosity_erg_s_per_msun_yr = 1e40;  // emitted between the threshold and 2 keV
  double xray_threshold_energy_keV = 0.5;           // softer photons never leave the galaxies
  double xray_spectral_index = 1.0;                 // α in L_E ∝ E^−α
  double lyman_photons_per_stellar_baryon = 9690.0;  // between Lyman-α and the Lyman limit
  double star_fraction = 0.05;                       // constant source model only
  double start_redshift = 35.0;                      // T_K, x_e integrated from here
  double max_step_dlog1pz = 0.02;                    // redshift step, in ln(1+z)
  std::size_t n_shells = 12;                         // shells up to half the transverse box
};

struct ConeSettings {
  std::size_t n_perp = 64, n_los = 640;
  double cell_mpc = 2.0;
  double z_min = 6.0, z_max = 10.0;  // the band the cone must cover (near end at z_min)
  bool velocity_gradient = true;
  double velocity_gradient_max = 0.5;  // clamp on |H^-1 dv_r/dr|
  bool zeldovich_displacement = false;  // density moved by D ψ (CIC deposit) instead of linear D δ0
  bool reionization = true;
  SourceModel model = SourceModel::constant;
  double ionizing_efficiency = 30.0;
  double min_virial_temperature_K = 1e4;
  double bubble_radius_max_mpc = 30.0;
  std::size_t n_radii = 24;
  bool partial_ionization = true;
  double ionizing_photons_per_baryon = 5000.0;
  double star_fraction_at_1e10 = 0.05, star_fraction_slope = 0.5;
  double escape_fraction_at_1e10 = 0.1, escape_fraction_slope = -0.5;
  double turnover_mass_msun = 5e8;
  bool photon_conservation = false;  // ionization history remapped to the photon budget (docs)
  SpinTemperatureModel spin;
  TanhSpinApproximation tanh_spin;
  // What generate_cone keeps besides δT_b (not campaign keys: asked by the caller).
  bool keep_density = false, keep_x_hi = false, keep_z_ion = false, keep_spin = false;
  bool uniform_density = false;  // tests: δ0 = 0 everywhere (the mean-field limit)
};

/// Read and check the settings (ConfigError naming the key on bad input).
ConeSettings settings_from(const core::Config& config);
/// The consistency checks of settings_from for settings built in code.
void check_settings(const ConeSettings& s, const cosmo::Cosmology& c);

struct LightCone {
  std::array<std::size_t, 3> global_shape{0, 0, 0};  // n_perp, n_perp, n_los
  std::size_t local_start0 = 0, local_n0 = 0;         // this rank's slab of axis 0
  double cell_mpc = 0;
  core::Array3<float> delta_tb_mK;  // local_n0 × n_perp × n_los; LOS cell 0 = lowest redshift
  std::vector<double> distance_mpc, z, freq_MHz;  // per LOS cell centre
  std::vector<double> x_hi_mean, tb_mean_mK;      // means over each transverse plane
  // With the spin-temperature model (empty without): plane means of the gas temperature,
  // spin temperature, Lyman-α coupling and X-ray ionized fraction of the neutral gas.
  std::vector<double> tk_mean_K, ts_mean_K, x_alpha_mean, x_e_mean;
  std::optional<core::Array3<float>> density;     // δ (evolved) when keep_density
  std::optional<core::Array3<float>> x_hi;        // neutral fraction when keep_x_hi
  std::optional<core::Array3<float>> z_ion;       // reionization redshift (-inf: not in band)
  std::optional<core::Array3<float>> spin_K, gas_K;  // T_S and T_K when keep_spin
};

/// One light cone; collective on `group`. Identical bits for the same entry
/// and group size; equal to float rounding across group sizes.
LightCone generate_cone(const ConeSettings& settings, const cosmo::Cosmology& cosmology,
                        const rng::EntryKey& key, MPI_Comm group);

/// The whole δT_b cone (n_perp × n_perp × n_los) on every rank of the group.
core::Array3<float> allgather_cone(const LightCone& cone, MPI_Comm group);
/// Same for any local field of the cone's slab layout.
core::Array3<float> allgather_field(const LightCone& cone, const core::Array3<float>& local, MPI_Comm group);

}  // namespace spinflip::sim
