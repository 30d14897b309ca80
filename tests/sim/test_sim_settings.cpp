// Bad input → one-line ConfigError naming the key.
#include <gtest/gtest.h>

#include <string>

#include "core/errors.hpp"
#include "cosmo/cosmology.hpp"
#include "sim/lightcone.hpp"

using namespace spinflip;

namespace {
const core::Schema& schema() {
  static const core::Schema s = [] {
    core::Schema x;
    cosmo::declare_keys(x);
    sim::declare_keys(x);
    return x;
  }();
  return s;
}

// The message of the ConfigError that reading `text` raises ("" if none).
std::string error_of(const std::string& text) {
  try {
    auto cfg = core::Config::from_string(text, "bad.toml", schema());
    (void)sim::settings_from(cfg);
  } catch (const ConfigError& e) {
    return e.what();
  }
  return "";
}

void expect_one_line_naming(const std::string& text, const std::string& key) {
  const std::string m = error_of(text);
  EXPECT_NE(m.find(key), std::string::npos) << "message: " << m;
  EXPECT_EQ(m.find('\n'), std::string::npos) << "message: " << m;
}
}  // namespace

TEST(SimSettings, DefaultsAreConsistent) {
  EXPECT_EQ(error_of(""), "");
  auto cfg = core::Config::from_string("[sources]\nionizing_efficiency = 40.0\n", "ok.toml", schema());
  auto s = sim::settings_from(cfg);
  EXPECT_EQ(s.ionizing_efficiency, 40.0);
  EXPECT_EQ(s.model, sim::SourceModel::constant);
}

TEST(SimSettings, EfficiencyAtMostOne) {
  expect_one_line_naming("[sources]\nionizing_efficiency = 1.0\n", "sources.ionizing_efficiency");
  expect_one_line_naming("[sources]\nionizing_efficiency = 0.5\n", "sources.ionizing_efficiency");
}

TEST(SimSettings, CellLargerThanBubbleCap) {
  expect_one_line_naming("[cone]\ncell_mpc = 4.0\nn_los = 512\n[sources]\nbubble_radius_max_mpc = 3.0\n",
                         "sources.bubble_radius_max_mpc");
}

TEST(SimSettings, BandOutsideAllowedRedshifts) {
  expect_one_line_naming("[cone]\nz_min = 4.0\n", "cone.z_min");
  expect_one_line_naming("[cone]\nz_max = 36.0\n", "cone.z_max");
  // Far end beyond z = 35: 4096 cells of 4 Mpc from z = 20.
  expect_one_line_naming("[cone]\nz_min = 20.0\nz_max = 22.0\nn_los = 4096\ncell_mpc = 4.0\n", "cone.n_los");
  expect_one_line_naming("[cone]\nz_min = 9.0\nz_max = 8.0\n", "cone.z_max");
}

TEST(SimSettings, BoxTooShortForBand) {
  const std::string m = error_of("[cone]\nz_min = 6.0\nz_max = 10.0\nn_los = 64\ncell_mpc = 2.0\n");
  EXPECT_NE(m.find("cone.n_los"), std::string::npos) << m;
  EXPECT_NE(m.find("too short"), std::string::npos) << m;
}

TEST(SimSettings, NegativeTemperatures) {
  expect_one_line_naming("[tanh_spin_approximation]\nenabled = true\nheating_temperature_K = -10.0\n",
                         "tanh_spin_approximation.heating_temperature_K");
  expect_one_line_naming("[sources]\nmin_virial_temperature_K = -1e4\n", "sources.min_virial_temperature_K");
}

TEST(SimSettings, CheckSettingsInCode) {
  sim::ConeSettings s;
  s.cell_mpc = 5;
  s.n_los = 512;
  s.bubble_radius_max_mpc = 2;
  const cosmo::Cosmology c;
  try {
    sim::check_settings(s, c);
    FAIL() << "no error";
  } catch (const ConfigError& e) {
    EXPECT_NE(std::string(e.what()).find("sources.bubble_radius_max_mpc"), std::string::npos);
  }
}

// The spin-temperature model's bad values (issue 16): each refused in one line naming the key.
TEST(SimSettings, SpinTemperatureBadValues) {
  expect_one_line_naming("[spin_temperature]\nenabled = true\nxray_luminosity_erg_s_per_msun_yr = -1e40\n",
                         "spin_temperature.xray_luminosity_erg_s_per_msun_yr");
  expect_one_line_naming("[spin_temperature]\nenabled = true\nxray_threshold_energy_keV = 3.0\n",
                         "spin_temperature.xray_threshold_energy_keV");
  expect_one_line_naming("[spin_temperature]\nenabled = true\nxray_threshold_energy_keV = 0.01\n",
                         "spin_temperature.xray_threshold_energy_keV");
  // Steps from z = 12 cannot reach a cone whose far end lies at z ≈ 13.
  expect_one_line_naming("[cone]\nz_min = 10.0\nz_max = 13.0\nn_los = 400\ncell_mpc = 3.0\n"
                         "[spin_temperature]\nenabled = true\nstart_redshift = 12.0\n",
                         "spin_temperature.start_redshift");
  expect_one_line_naming("[spin_temperature]\nenabled = true\nmax_step_dlog1pz = 0.0\n",
                         "spin_temperature.max_step_dlog1pz");
  expect_one_line_naming("[spin_temperature]\nenabled = true\n[tanh_spin_approximation]\nenabled = true\n",
                         "tanh_spin_approximation.enabled");
  EXPECT_EQ(error_of("[spin_temperature]\nenabled = true\n"), "");
}
