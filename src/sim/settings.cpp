// The [cone], [sources], [spin_temperature] and [tanh_spin_approximation] keys: declared once here.
#include <cmath>
#include <functional>
#include <string>

#include "core/errors.hpp"
#include "cosmo/cosmology.hpp"
#include "sim/lightcone.hpp"

namespace spinflip::sim {

using core::KeySpec;
using core::ValueType;

void declare_keys(core::Schema& s) {
  s.add_table("cone", "Geometry of the simulated light cone (comoving grid, near end at the lowest redshift).");
  s.add({.path = "cone.n_perp", .type = ValueType::integer, .default_value = std::int64_t{64}, .unit = "cells",
         .min = 4, .max = 4096, .doc = "cells across each transverse axis"});
  s.add({.path = "cone.n_los", .type = ValueType::integer, .default_value = std::int64_t{640}, .unit = "cells",
         .min = 4, .max = 65536, .doc = "cells along the line of sight (the box is as long as the cone)"});
  s.add({.path = "cone.cell_mpc", .type = ValueType::real, .default_value = 2.0, .unit = "Mpc", .min = 0.0,
         .max = 100.0, .min_exclusive = true, .doc = "comoving cell size"});
  s.add({.path = "cone.z_min", .type = ValueType::real, .default_value = 6.0, .min = 5.0, .max = 35.0,
         .doc = "redshift of the near end of the cone"});
  s.add({.path = "cone.z_max", .type = ValueType::real, .default_value = 10.0, .min = 5.0, .max = 35.0,
         .doc = "highest redshift the cone must reach (n_los × cell_mpc must cover z_min..z_max)"});
  s.add({.path = "cone.velocity_gradient", .type = ValueType::boolean, .default_value = true,
         .doc = "include the linear line-of-sight velocity-gradient factor (1 + H⁻¹ dv_r/dr)⁻¹"});
  s.add({.path = "cone.velocity_gradient_max", .type = ValueType::real, .default_value = 0.5, .min = 0.0,
         .max = 0.9, .min_exclusive = true, .doc = "clamp on |H⁻¹ dv_r/dr| (linear theory breaks down beyond)"});
  s.add({.path = "cone.zeldovich_displacement", .type = ValueType::boolean, .default_value = false,
         .doc = "move the density by the Zel'dovich displacement D(z) ψ (cloud-in-cell deposit; mass carried past "
                "the cone's line-of-sight ends is lost); ionization and velocity stay linear"});

  s.add_table("sources", "Ionizing sources and the excursion-set reionization model.");
  s.add({.path = "sources.reionization", .type = ValueType::boolean, .default_value = true,
         .doc = "false: a fully neutral cone (density and velocity terms only)"});
  s.add({.path = "sources.model", .type = ValueType::string, .default_value = std::string("constant"),
         .choices = {"constant", "mass_dependent"},
         .doc = "constant ionizing efficiency, or star and escape fractions as power laws in halo mass"});
  s.add({.path = "sources.ionizing_efficiency", .type = ValueType::real, .default_value = 30.0, .min = 1.0,
         .max = 1e4, .min_exclusive = true,
         .doc = "ionizing photons per collapsed baryon that reach the IGM (constant model)", .can_vary = true});
  s.add({.path = "sources.min_virial_temperature_K", .type = ValueType::real, .default_value = 1e4, .unit = "K",
         .min = 100.0, .max = 1e7, .doc = "smallest virial temperature of a halo hosting sources", .can_vary = true});
  s.add({.path = "sources.bubble_radius_max_mpc", .type = ValueType::real, .default_value = 30.0, .unit = "Mpc",
         .min = 0.0, .max = 500.0, .min_exclusive = true,
         .doc = "largest smoothing radius of the excursion set (mean free path of ionizing photons)",
         .can_vary = true});
  s.add({.path = "sources.n_radii", .type = ValueType::integer, .default_value = std::int64_t{24}, .min = 2,
         .max = 200, .doc = "smoothing radii, log-spaced from the bubble cap down to the cell"});
  s.add({.path = "sources.partial_ionization", .type = ValueType::boolean, .default_value = true,
         .doc = "cells not flagged ionized are ionized by their own-scale yield"});
  s.add({.path = "sources.ionizing_photons_per_baryon", .type = ValueType::real, .default_value = 5000.0,
         .min = 0.0, .max = 1e6, .min_exclusive = true,
         .doc = "ionizing photons per stellar baryon (mass-dependent model)", .can_vary = true});
  s.add({.path = "sources.star_fraction_at_1e10", .type = ValueType::real, .default_value = 0.05, .min = 0.0,
         .max = 1.0, .min_exclusive = true,
         .doc = "fraction of halo baryons in stars at 1e10 solar masses (mass-dependent model)", .can_vary = true});
  s.add({.path = "sources.star_fraction_slope", .type = ValueType::real, .default_value = 0.5, .min = -1.0,
         .max = 2.0, .doc = "power-law index of the star fraction in halo mass", .can_vary = true});
  s.add({.path = "sources.escape_fraction_at_1e10", .type = ValueType::real, .default_value = 0.1, .min = 0.0,
         .max = 1.0, .min_exclusive = true,
         .doc = "escape fraction of ionizing photons at 1e10 solar masses (mass-dependent model)",
         .can_vary = true});
  s.add({.path = "sources.escape_fraction_slope", .type = ValueType::real, .default_value = -0.5, .min = -2.0,
         .max = 2.0, .doc = "power-law index of the escape fraction in halo mass", .can_vary = true});
  s.add({.path = "sources.turnover_mass_msun", .type = ValueType::real, .default_value = 5e8, .unit = "Msun",
         .min = 1e5, .max = 1e12, .doc = "halo mass below which star formation is exponentially suppressed",
         .can_vary = true});

  s.add({.path = "sources.photon_conservation", .type = ValueType::boolean, .default_value = false,
         .doc = "remap the ionization redshifts so that the box's ionized fraction follows the photon budget "
                "(ζ f_coll, or the mass-dependent yield) at each redshift (Park, Greig & Mesinger 2022 idea; docs)"});

  s.add_table("spin_temperature",
              "Spin temperature cell by cell: Lyman-α coupling from the Lyman-series background and X-ray heating "
              "and ionization, from the sources' star formation summed over shells at the retarded redshift.");
  s.add({.path = "spin_temperature.enabled", .type = ValueType::boolean, .default_value = false,
         .doc = "false: T_S >> T_CMB (emission only, unless tanh_spin_approximation.enabled)"});
  s.add({.path = "spin_temperature.xray_luminosity_erg_s_per_msun_yr", .type = ValueType::real,
         .default_value = 1e40, .unit = "erg/s per Msun/yr", .min = 0.0, .max = 1e45,
         .doc = "X-ray luminosity per star-formation rate, emitted between the threshold energy and 2 keV",
         .can_vary = true});
  s.add({.path = "spin_temperature.xray_threshold_energy_keV", .type = ValueType::real, .default_value = 0.5,
         .unit = "keV", .min = 0.1, .max = 1.5,
         .doc = "X-rays below this energy are absorbed inside their galaxies (self-absorption)", .can_vary = true});
  s.add({.path = "spin_temperature.xray_spectral_index", .type = ValueType::real, .default_value = 1.0, .min = -1.0,
         .max = 3.0, .doc = "energy index α of the X-ray spectrum, L_E ∝ E^−α (up to 10 keV)", .can_vary = true});
  s.add({.path = "spin_temperature.lyman_photons_per_stellar_baryon", .type = ValueType::real,
         .default_value = 9690.0, .min = 0.0, .max = 1e6,
         .doc = "photons between Lyman-α and the Lyman limit per stellar baryon (spectrum ∝ ν^−0.86)",
         .can_vary = true});
  s.add({.path = "spin_temperature.star_fraction", .type = ValueType::real, .default_value = 0.05, .min = 0.0,
         .max = 1.0, .min_exclusive = true,
         .doc = "fraction of collapsed baryons in stars, constant source model (the mass-dependent model uses "
                "sources.star_fraction_at_1e10, its slope and the turnover mass)",
         .can_vary = true});
  s.add({.path = "spin_temperature.start_redshift", .type = ValueType::real, .default_value = 35.0, .min = 10.0,
         .max = 60.0,
         .doc = "gas temperature and X-ray ionization integrated from here (T_K from adiabatic cooling since "
                "decoupling at z = 150); must be at or above the cone's far end"});
  s.add({.path = "spin_temperature.max_step_dlog1pz", .type = ValueType::real, .default_value = 0.02, .min = 0.0,
         .max = 0.2, .min_exclusive = true, .doc = "largest redshift step, in ln(1+z)"});
  s.add({.path = "spin_temperature.n_shells", .type = ValueType::integer, .default_value = std::int64_t{12},
         .min = 2, .max = 64,
         .doc = "shells of the radiation sums, log-spaced from the cell up to half the transverse box"});

  s.add_table("tanh_spin_approximation",
              "Approximation: one global spin-temperature history of tanh steps (no fluctuations of T_S); "
              "[spin_temperature] is the physical model.");
  s.add({.path = "tanh_spin_approximation.enabled", .type = ValueType::boolean, .default_value = false,
         .doc = "use the tanh approximation (exclusive with spin_temperature.enabled)"});
  s.add({.path = "tanh_spin_approximation.coupling_redshift", .type = ValueType::real, .default_value = 17.0,
         .min = 5.0, .max = 40.0, .doc = "redshift where Lyman-alpha coupling is half way", .can_vary = true});
  s.add({.path = "tanh_spin_approximation.coupling_width", .type = ValueType::real, .default_value = 2.0, .min = 0.0,
         .max = 20.0, .min_exclusive = true, .doc = "redshift width of the coupling step"});
  s.add({.path = "tanh_spin_approximation.coupling_strength", .type = ValueType::real, .default_value = 30.0, .min = 0.0,
         .max = 1e4, .min_exclusive = true, .doc = "Lyman-alpha coupling coefficient once coupling is complete"});
  s.add({.path = "tanh_spin_approximation.heating_redshift", .type = ValueType::real, .default_value = 11.0,
         .min = 5.0, .max = 40.0, .doc = "redshift where gas heating is half way", .can_vary = true});
  s.add({.path = "tanh_spin_approximation.heating_width", .type = ValueType::real, .default_value = 1.5, .min = 0.0,
         .max = 20.0, .min_exclusive = true, .doc = "redshift width of the heating step"});
  s.add({.path = "tanh_spin_approximation.heating_temperature_K", .type = ValueType::real, .default_value = 500.0,
         .unit = "K", .min = 0.0, .max = 1e6, .doc = "gas temperature added by heating once complete",
         .can_vary = true});
}

double TanhSpinApproximation::spin_temperature_K(double z, double T_cmb0_K) const {
  const double t_cmb = T_cmb0_K * (1.0 + z);
  // Adiabatic cooling after thermal decoupling at z ≈ 150 (common practice): T_K ∝ (1+z)².
  const double t_adiabatic = T_cmb0_K * (1.0 + z) * (1.0 + z) / 151.0;
  const double heated = 0.5 * (1.0 - std::tanh((z - heating_redshift) / heating_width));
  const double t_gas = std::min(t_cmb, t_adiabatic) + heating_temperature_K * heated;
  const double x_alpha = coupling_strength * 0.5 * (1.0 - std::tanh((z - coupling_redshift) / coupling_width));
  // Field 1958 / Furlanetto, Oh & Briggs (2006) eq. 5 with only Lyα coupling, T_colour = T_K.
  return (1.0 + x_alpha) / (1.0 / t_cmb + x_alpha / t_gas);
}

namespace {

using FailFn = std::function<void(const std::string& key, const std::string& message)>;

void check(const ConeSettings& s, const cosmo::Cosmology& c, const FailFn& fail) {
  if (!(s.z_max > s.z_min)) fail("cone.z_max", "must be above cone.z_min = " + std::to_string(s.z_min));
  if (s.reionization && s.cell_mpc > s.bubble_radius_max_mpc)
    fail("sources.bubble_radius_max_mpc",
         "the bubble cap must be at least the cell size cone.cell_mpc = " + std::to_string(s.cell_mpc) + " Mpc");
  const double d_near = c.comoving_distance_mpc(s.z_min);
  const double needed = c.comoving_distance_mpc(s.z_max) - d_near;
  const double length = static_cast<double>(s.n_los) * s.cell_mpc;
  if (length < needed)
    fail("cone.n_los", "box too short for the band: n_los × cell_mpc = " + std::to_string(length) +
                           " Mpc but z " + std::to_string(s.z_min) + ".." + std::to_string(s.z_max) + " needs " +
                           std::to_string(needed) + " Mpc");
  const double d_far = d_near + length;
  if (d_far > c.comoving_distance_mpc(35.0))
    fail("cone.n_los", "the cone's far end (" + std::to_string(length) +
                           " Mpc beyond z_min) lies beyond z = 35, the highest redshift allowed");
  if (s.model == SourceModel::constant && !(s.ionizing_efficiency > 1.0))
    fail("sources.ionizing_efficiency", "must be above 1");
  if (s.tanh_spin.enabled && !(s.tanh_spin.heating_temperature_K >= 0.0))
    fail("tanh_spin_approximation.heating_temperature_K", "must not be negative");
  if (s.tanh_spin.enabled && s.spin.enabled)
    fail("tanh_spin_approximation.enabled", "the approximation and spin_temperature.enabled exclude each other");
  if (s.spin.enabled) {
    const double z_far = c.redshift_at_comoving_distance(d_far);
    if (!(s.spin.start_redshift >= z_far))
      fail("spin_temperature.start_redshift", "the redshift steps must start at or beyond the cone's far end z = " +
                                                  std::to_string(z_far) + ", got " +
                                                  std::to_string(s.spin.start_redshift));
    if (!(s.spin.xray_luminosity_erg_s_per_msun_yr >= 0.0))
      fail("spin_temperature.xray_luminosity_erg_s_per_msun_yr", "must not be negative");
    if (!(s.spin.xray_threshold_energy_keV >= 0.1 && s.spin.xray_threshold_energy_keV <= 1.5))
      fail("spin_temperature.xray_threshold_energy_keV", "must lie in [0.1, 1.5] keV");
    if (!(s.spin.lyman_photons_per_stellar_baryon >= 0.0))
      fail("spin_temperature.lyman_photons_per_stellar_baryon", "must not be negative");
    if (s.n_perp < 4) fail("cone.n_perp", "the spin-temperature shells need at least 4 cells across");
  }
  if (!(s.min_virial_temperature_K > 0.0)) fail("sources.min_virial_temperature_K", "must be positive");
}

}  // namespace

void check_settings(const ConeSettings& s, const cosmo::Cosmology& c) {
  check(s, c, [&](const std::string& key, const std::string& message) -> void {
    throw ConfigError(key + ": " + message);
  });
}

ConeSettings settings_from(const core::Config& cfg) {
  ConeSettings s;
  s.n_perp = static_cast<std::size_t>(cfg.integer("cone.n_perp"));
  s.n_los = static_cast<std::size_t>(cfg.integer("cone.n_los"));
  s.cell_mpc = cfg.real("cone.cell_mpc");
  s.z_min = cfg.real("cone.z_min");
  s.z_max = cfg.real("cone.z_max");
  s.velocity_gradient = cfg.boolean("cone.velocity_gradient");
  s.velocity_gradient_max = cfg.real("cone.velocity_gradient_max");
  s.zeldovich_displacement = cfg.boolean("cone.zeldovich_displacement");
  s.reionization = cfg.boolean("sources.reionization");
  s.model = cfg.string("sources.model") == "mass_dependent" ? SourceModel::mass_dependent : SourceModel::constant;
  s.ionizing_efficiency = cfg.real("sources.ionizing_efficiency");
  s.min_virial_temperature_K = cfg.real("sources.min_virial_temperature_K");
  s.bubble_radius_max_mpc = cfg.real("sources.bubble_radius_max_mpc");
  s.n_radii = static_cast<std::size_t>(cfg.integer("sources.n_radii"));
  s.partial_ionization = cfg.boolean("sources.partial_ionization");
  s.ionizing_photons_per_baryon = cfg.real("sources.ionizing_photons_per_baryon");
  s.star_fraction_at_1e10 = cfg.real("sources.star_fraction_at_1e10");
  s.star_fraction_slope = cfg.real("sources.star_fraction_slope");
  s.escape_fraction_at_1e10 = cfg.real("sources.escape_fraction_at_1e10");
  s.escape_fraction_slope = cfg.real("sources.escape_fraction_slope");
  s.turnover_mass_msun = cfg.real("sources.turnover_mass_msun");
  s.tanh_spin.enabled = cfg.boolean("tanh_spin_approximation.enabled");
  s.tanh_spin.coupling_redshift = cfg.real("tanh_spin_approximation.coupling_redshift");
  s.tanh_spin.coupling_width = cfg.real("tanh_spin_approximation.coupling_width");
  s.tanh_spin.coupling_strength = cfg.real("tanh_spin_approximation.coupling_strength");
  s.tanh_spin.heating_redshift = cfg.real("tanh_spin_approximation.heating_redshift");
  s.tanh_spin.heating_width = cfg.real("tanh_spin_approximation.heating_width");
  s.tanh_spin.heating_temperature_K = cfg.real("tanh_spin_approximation.heating_temperature_K");
  s.photon_conservation = cfg.boolean("sources.photon_conservation");
  s.spin.enabled = cfg.boolean("spin_temperature.enabled");
  s.spin.xray_luminosity_erg_s_per_msun_yr = cfg.real("spin_temperature.xray_luminosity_erg_s_per_msun_yr");
  s.spin.xray_threshold_energy_keV = cfg.real("spin_temperature.xray_threshold_energy_keV");
  s.spin.xray_spectral_index = cfg.real("spin_temperature.xray_spectral_index");
  s.spin.lyman_photons_per_stellar_baryon = cfg.real("spin_temperature.lyman_photons_per_stellar_baryon");
  s.spin.star_fraction = cfg.real("spin_temperature.star_fraction");
  s.spin.start_redshift = cfg.real("spin_temperature.start_redshift");
  s.spin.max_step_dlog1pz = cfg.real("spin_temperature.max_step_dlog1pz");
  s.spin.n_shells = static_cast<std::size_t>(cfg.integer("spin_temperature.n_shells"));
  const cosmo::Cosmology c(cosmo::parameters_from(cfg));
  check(s, c, [&](const std::string& key, const std::string& message) -> void { cfg.fail(key, message); });
  return s;
}

}  // namespace spinflip::sim
