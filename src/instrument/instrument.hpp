// Instrument scenarios (DESIGN.md §5): what an interferometer delivers from a
// clean light cone — uv coverage of an array with Earth-rotation synthesis
// (angular resolution), thermal noise from the radiometer equation, k=0
// removal and the foreground wedge — plus the slices and chunks the kernels
// measure. Works on a whole cone in memory; knows nothing of MPI or HDF5.
// Cone: n_perp × n_perp × n_los, C order, axis 2 = line of sight, LOS cell 0
// at the lowest redshift. Derivation of the noise: docs/instrument.md.
#pragma once
#include <array>
#include <cstdint>
#include <functional>
#include <string>
#include <utility>
#include <vector>

#include "core/array.hpp"
#include "core/config.hpp"
#include "core/rng.hpp"
#include "stats/stats.hpp"

namespace spinflip::cosmo { class Cosmology; }

namespace spinflip::instrument {

void declare_keys(core::Schema& schema);  // [scenarios.*], [slices], [chunks]

/// Per-LOS-cell geometry of a cone.
struct ConeGeometry {
  std::array<std::size_t, 3> shape{0, 0, 0};
  double cell_mpc = 0.0;
  std::vector<double> z, freq_MHz, distance_mpc;  // comoving distance of each LOS cell
};

/// Station positions (east, north, up) in metres.
struct Station { double east_m, north_m, up_m; };
std::vector<Station> read_array_csv(const std::string& path);
std::vector<Station> builtin_array(std::size_t stations, double core_radius_m, double outer_radius_m,
                                   double station_diameter_m);

/// Baseline coordinates (u, v) in metres (divide by λ for wavelengths) of all
/// N(N-1)/2 station pairs i<j at hour angle ha_rad; the conjugate (-u,-v) is implied.
std::vector<std::array<double, 2>> snapshot_uv_m(const std::vector<Station>& stations, double latitude_deg,
                                                 double declination_deg, double hour_angle_rad);

/// Settings of one named scenario.
struct Settings {
  std::string name;
  std::string array = "builtin";  // none | builtin | csv
  double station_diameter_m = 30.0;
  double latitude_deg = -30.0, declination_deg = -30.0;
  double hours_per_day = 6.0, integration_s = 60.0, observing_hours = 1000.0;
  double receiver_temperature_K = 100.0;
  bool noise = false, wedge = false;
  double wedge_angle_deg = 90.0, wedge_buffer_per_mpc = 0.0;
  std::size_t chunk_cells = 0;  // wedge is cut on LOS chunks of this many cells
  std::string taper = "none";  // none | gaussian: imaging weight on the uv grid
  bool cross_power = false;    // power from two independent noise realisations (no noise bias)
  double taper_fwhm_wavelengths = 1000.0;
  std::vector<std::pair<std::string, core::Value>> attributes;
};

/// Wedge slope m(z) = D_c H sinθ / (c (1+z)).
double wedge_slope(double distance_mpc, double hubble_km_s_mpc, double z, double angle_deg);
/// T_sys = T_rcv + 60 K (ν/300 MHz)^-2.55 (common practice).
double system_temperature_K(double receiver_K, double freq_MHz);

struct Unit;

class Scenario {
 public:
  /// uv_time_s: per LOS cell, observing seconds per cell of the full n_perp×n_perp
  /// transverse Fourier grid (fftfreq order); empty = every cell observed, no noise possible.
  /// wedge_slopes: m(z) per LOS cell (used when settings.wedge).
  Scenario(Settings settings, std::uint32_t index, std::vector<std::vector<float>> uv_time_s,
           std::vector<double> wedge_slopes, const ConeGeometry& geometry);
  const std::string& name() const { return settings_.name; }
  std::uint32_t index() const { return index_; }
  const Settings& settings() const { return settings_; }
  std::vector<std::pair<std::string, core::Value>> attributes() const { return settings_.attributes; }
  /// Observing seconds per transverse Fourier cell (n_perp × n_perp, fftfreq order) at a LOS cell.
  core::Array2<float> uv_time_s(std::size_t los_cell) const;
  /// Weight of the uv taper on transverse Fourier cell (i, j) (fftfreq order) at a LOS cell (1 without one).
  double taper_weight(std::size_t los_cell, std::size_t i, std::size_t j) const;
  /// rms (mK) of the real part of the noise on DFT mode (i,j) of LOS cell k, DFT = Σ_x T(x) e^{-ik·x}.
  double noise_sigma_mK(std::size_t los_cell, double uv_time_s) const;
  /// second_noise: draw the independent second noise realisation (cross_power scenarios).
  void apply(core::Array3<float>& cone_mK, const ConeGeometry& geometry, const rng::EntryKey& key,
             bool second_noise = false) const;
  /// The Fourier modes this scenario keeps in a unit (DESIGN.md §5 "Observed modes";
  /// docs/instrument.md): built once per campaign, the same for every entry.
  stats::KeptModes kept_modes(const Unit& unit, bool chunk, const ConeGeometry& geometry) const;

 private:
  Settings settings_;
  std::uint32_t index_;
  std::size_t n_perp_, n_los_;
  std::vector<float> uv_time_;  // [LOS cell][uv cell]: apply works on LOS-major planes
  std::vector<double> slopes_, sigma_unit_;  // sigma_unit_: σ·sqrt(t) per LOS cell
  std::vector<float> sigma_unit_f_;          // the same in float for the noise loop
  // Gaussian taper, separable on the grid: weight(i, j) = taper_[k][i] · taper_[k][j]; empty = none.
  std::vector<float> taper_;
};

/// Build every [scenarios.*] of the campaign in name order (uv gridding happens here, once).
std::vector<Scenario> scenarios_from(const core::Config& config, const cosmo::Cosmology& cosmology,
                                     const ConeGeometry& geometry);
/// Same with H(z) (km/s/Mpc) given as a function (tests, tools without a Cosmology).
std::vector<Scenario> scenarios_from(const core::Config& config,
                                     const std::function<double(double)>& hubble_km_s_mpc,
                                     const ConeGeometry& geometry);

/// The scenarios' settings, checked exactly as scenarios_from checks them, without the uv
/// gridding (the bulk of its cost): what `spinflip plan` needs.
std::vector<Settings> scenario_settings_from(const core::Config& config, const cosmo::Cosmology& cosmology,
                                             const ConeGeometry& geometry);
std::vector<Settings> scenario_settings_from(const core::Config& config,
                                             const std::function<double(double)>& hubble_km_s_mpc,
                                             const ConeGeometry& geometry);

/// A slice (averaged over its channel width) or a chunk.
struct Unit { std::size_t los_begin, los_end; double freq_MHz, z; };
std::vector<Unit> slice_units(const core::Config& config, const ConeGeometry& geometry);
std::vector<Unit> chunk_units(const core::Config& config, const ConeGeometry& geometry);
std::size_t chunk_cells(const core::Config& config, const ConeGeometry& geometry);
core::Array2<float> extract_slice(const core::Array3<float>& cone, const Unit& unit);  // mean over LOS range
core::Array3<float> extract_chunk(const core::Array3<float>& cone, const Unit& unit);

}  // namespace spinflip::instrument
