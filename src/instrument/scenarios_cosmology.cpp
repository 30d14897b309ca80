// scenarios_from and scenario_settings_from with the campaign's Cosmology (H(z) for the wedge slope).
#include "cosmo/cosmology.hpp"
#include "instrument/instrument.hpp"

namespace spinflip::instrument {

std::vector<Scenario> scenarios_from(const core::Config& config, const cosmo::Cosmology& cosmology,
                                     const ConeGeometry& geometry) {
  return scenarios_from(config, [&](double z) { return cosmology.hubble_km_s_mpc(z); }, geometry);
}

std::vector<Settings> scenario_settings_from(const core::Config& config, const cosmo::Cosmology& cosmology,
                                             const ConeGeometry& geometry) {
  return scenario_settings_from(config, [&](double z) { return cosmology.hubble_km_s_mpc(z); }, geometry);
}

}  // namespace spinflip::instrument
