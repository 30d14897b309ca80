// The spin-temperature model (sim/spin_temperature.cpp, sim/cosmic_dawn.cpp) and photon
// conservation: published tables and limits, and the cone on one rank and on slabs.
#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <cstring>
#include <vector>

#include "../support/mpi_helpers.hpp"
#include "common.hpp"
#include "cosmo/cosmology.hpp"
#include "sim/cosmic_dawn.hpp"
#include "sim/excursion_set.hpp"
#include "sim/lightcone.hpp"
#include "sim/spin_temperature.hpp"

using namespace spinflip;
using test_support::small_cone_key;
using test_support::world_rank;

namespace {

/// 16 × 16 × 160 cells of 6 Mpc from z = 12 to the far end (z ≈ 20.3), steps from z = 21.
sim::ConeSettings dawn_cone() {
  sim::ConeSettings s;
  s.n_perp = 16;
  s.n_los = 160;
  s.cell_mpc = 6.0;
  s.z_min = 12.0;
  s.z_max = 17.5;
  s.reionization = false;
  s.spin.enabled = true;
  s.spin.start_redshift = 21.0;
  s.spin.n_shells = 5;
  return s;
}

}  // namespace

// Furlanetto, Oh & Briggs (2006) Table 2 (κ_10^HH of Zygelman 2005; values from memory), read
// back at its nodes and log–log between them; x_c = T_* n_H κ /(A10 T_γ) (FOB06 eq. 3).
TEST(SimDawn, CollisionalCouplingFollowsThePublishedTable) {
  const double T[] = {1, 10, 20, 50, 100, 300, 1000, 5000};
  const double kappa[] = {1.38e-13, 2.88e-12, 1.78e-11, 6.86e-11, 1.19e-10, 2.09e-10, 3.31e-10, 6.03e-10};
  for (std::size_t i = 0; i < std::size(T); ++i)
    EXPECT_NEAR(sim::detail::kappa_hh_cm3_s(T[i]) / kappa[i], 1.0, 1e-9) << T[i];  // node values: rounding only
  // Between 20 and 25 K the table rises from 1.78e-11 to 2.73e-11: log–log at the geometric midpoint.
  EXPECT_NEAR(sim::detail::kappa_hh_cm3_s(std::sqrt(20.0 * 25.0)), std::sqrt(1.78e-11 * 2.73e-11), 1e-9 * 2.2e-11);
  // x_c of neutral gas: T_* = 0.0682 K, A10 = 2.85e-15 s⁻¹ (FOB06 §2.2, common practice).
  const double n_h = 1.9e-7 * std::pow(31.0, 3), t_cmb = 2.7255 * 31, tk = 20.0;
  EXPECT_NEAR(sim::detail::collisional_coupling(tk, t_cmb, n_h, 0.0), 0.0682 / (2.85e-15 * t_cmb) * n_h * 1.78e-11,
              1e-9);
  // More electrons, more coupling (κ_eH ≫ κ_HH at 20 K: FOB06 Fig. 1, fact of the trade).
  EXPECT_GT(sim::detail::collisional_coupling(tk, t_cmb, n_h, 0.1), sim::detail::collisional_coupling(tk, t_cmb, n_h, 0.0));
}

// Madau, Meiksin & Rees (1997); FOB06 eq. 11: x_α = 1.81e11 S_α J_α /(1+z) (from memory).
TEST(SimDawn, LymanAlphaCouplingCoefficient) {
  EXPECT_NEAR(sim::detail::x_alpha_per_intensity(2.7255 * 20.0) * 20.0 / 1.81e11, 1.0, 0.005);  // 3 digits quoted
}

// Verner et al. (1996): σ_HI(13.6 eV) = 6.30e-18 cm², σ_HeI(24.59 eV) = 7.42e-18 cm² (from memory);
// Shull & van Steenberg (1985): f_heat → 1 and f_ion → 0 as x_e → 1, f_heat ≈ 0.1–0.2 for x_e ~ 1e-4.
TEST(SimDawn, CrossSectionsAndEnergyFractions) {
  EXPECT_NEAR(sim::detail::sigma_hi_cm2(13.61e-3) / 6.30e-18, 1.0, 0.01);
  EXPECT_NEAR(sim::detail::sigma_hei_cm2(24.6e-3) / 7.42e-18, 1.0, 0.01);
  EXPECT_EQ(sim::detail::sigma_hi_cm2(10e-3), 0.0);
  EXPECT_NEAR(sim::detail::heat_fraction(1.0), 0.9971, 1e-12);
  EXPECT_NEAR(sim::detail::ionization_fraction(1.0), 0.0, 1e-12);
  EXPECT_GT(sim::detail::heat_fraction(1e-4), 0.1);
  EXPECT_LT(sim::detail::heat_fraction(1e-4), 0.2);
}

// With no sources T_K cools adiabatically, T ∝ (1+z)² (FOB06 §2.1): the slope d ln T / d ln(1+z)
// stays just below 2, the residual Compton heating of x_e ≈ 2e-4 lowering it by a few per cent at
// z ≈ 20–30 (common practice); x_α = 0 exactly (no Lyman-series photons).
TEST(SimDawn, WithoutSourcesTheGasCoolsAdiabaticallyAndIsUncoupled) {
  const cosmo::Cosmology c;
  auto s = dawn_cone();
  s.spin.start_redshift = 30.0;
  s.uniform_density = true;  // the plane means of a fluctuating box carry its large-scale density
  s.spin.xray_luminosity_erg_s_per_msun_yr = 0.0;
  s.spin.lyman_photons_per_stellar_baryon = 0.0;
  const auto cone = sim::generate_cone(s, c, small_cone_key, MPI_COMM_WORLD);
  for (double xa : cone.x_alpha_mean) EXPECT_EQ(xa, 0.0);
  const double t_start = 2.7255 * 151.0 * std::pow(31.0 / 151.0, 2);
  for (std::size_t k = 0; k + 20 < s.n_los; k += 20) {
    const double slope = std::log(cone.tk_mean_K[k + 20] / cone.tk_mean_K[k]) / std::log((1 + cone.z[k + 20]) / (1 + cone.z[k]));
    EXPECT_GT(slope, 1.85) << cone.z[k];
    EXPECT_LT(slope, 2.0) << cone.z[k];
    const double adiabatic = t_start * std::pow((1 + cone.z[k]) / 31.0, 2);
    EXPECT_GT(cone.tk_mean_K[k] / adiabatic, 1.0);   // Compton only heats (T_K < T_γ)
    EXPECT_LT(cone.tk_mean_K[k] / adiabatic, 1.15);  // … by a few per cent since z = 30
    EXPECT_LT(cone.ts_mean_K[k], c.parameters().T_cmb_K * (1 + cone.z[k]));  // collisions only, T_S < T_γ
  }
}

// The uniform-density cone equals the mean-field (one-zone) solution of the same equations to
// float rounding of the per-cell accumulators (1e-5 relative).
TEST(SimDawn, UniformDensityEqualsTheMeanFieldHistory) {
  const cosmo::Cosmology c;
  auto s = dawn_cone();
  s.uniform_density = true;
  const auto cone = sim::generate_cone(s, c, small_cone_key, MPI_COMM_WORLD);
  const auto mean = sim::detail::mean_field_history(s, c, cone.z);
  for (std::size_t k = 0; k < s.n_los; k += 7) {
    EXPECT_NEAR(cone.tk_mean_K[k] / mean.gas_K[k], 1.0, 1e-5) << cone.z[k];
    EXPECT_NEAR(cone.x_e_mean[k] / mean.x_e[k], 1.0, 1e-5) << cone.z[k];
  }
  EXPECT_GT(cone.x_alpha_mean.front(), 1.0);  // coupled by z = 12 (the check is not vacuous)
}

// DESIGN.md §3: same group size, identical bytes; one rank vs slabs, float rounding.
TEST(SimDawn, SameConeOnOneRankAndOnSlabs) {
  const cosmo::Cosmology c;
  auto s = dawn_cone();
  const auto group = sim::generate_cone(s, c, small_cone_key, MPI_COMM_WORLD);
  const auto whole = sim::allgather_cone(group, MPI_COMM_WORLD);
  const auto again = sim::allgather_cone(sim::generate_cone(s, c, small_cone_key, MPI_COMM_WORLD), MPI_COMM_WORLD);
  EXPECT_EQ(std::memcmp(whole.data.data(), again.data.data(), whole.data.size() * sizeof(float)), 0);
  if (world_rank() == 0) {
    const auto single = sim::generate_cone(s, c, small_cone_key, MPI_COMM_SELF);
    double worst = 0;
    for (std::size_t q = 0; q < whole.data.size(); ++q)
      worst = std::max(worst, static_cast<double>(std::abs(single.delta_tb_mK.data[q] - whole.data[q])));
    EXPECT_LT(worst, 1e-2);  // mK; FFT rounding (~1e-6) carried through the exponential source tables
    for (std::size_t k = 0; k < s.n_los; ++k) EXPECT_NEAR(single.tk_mean_K[k] / group.tk_mean_K[k], 1.0, 1e-4);
  }
}

// Spin-temperature fluctuations: the coupling and heating make δT_b vary more than density alone
// would under the global T_S of the same mean (fact of the trade: T_S fluctuations dominate at dawn).
TEST(SimDawn, SpinTemperatureVariesFromCellToCell) {
  const cosmo::Cosmology c;
  auto s = dawn_cone();
  s.keep_spin = true;
  const auto cone = sim::generate_cone(s, c, small_cone_key, MPI_COMM_WORLD);
  const std::size_t k = s.n_los / 2;
  double sum = 0, sum2 = 0, n = 0;
  for (std::size_t i = 0; i < cone.local_n0; ++i)
    for (std::size_t j = 0; j < s.n_perp; ++j) {
      const double t = (*cone.spin_K)(i, j, k);
      sum += t, sum2 += t * t, n += 1;
    }
  sum = test_support::sum_all(sum), sum2 = test_support::sum_all(sum2), n = test_support::sum_all(n);
  const double mean = sum / n, rms = std::sqrt(sum2 / n - mean * mean);
  EXPECT_NEAR(mean, cone.ts_mean_K[k], 1e-3 * mean);
  EXPECT_GT(rms / mean, 0.01);
}

// Photon conservation (Park, Greig & Mesinger 2022 idea): the cone's ionized fraction follows the
// photon budget ζ f̄_coll(z) (EPS, Lacey & Cole 1993) on average over the planes where the budget lies
// in (0.05, 0.95); without the option the excursion set lags the budget (Park et al. 2022; issue 16
// measured Δz ≈ 0.5 at x_HI = 0.5). Tolerance 0.03 on the mean over planes: single 32 × 32 planes
// scatter by ~0.1 (bubbles of ~20 Mpc in a 96 Mpc plane), the mean over ~30 of them by ~0.02.
TEST(SimDawn, PhotonConservationFollowsTheBudget) {
  const cosmo::Cosmology c;
  auto s = test_support::small_cone();
  s.z_min = 7.0;
  s.z_max = 10.0;
  s.n_los = 400;
  s.partial_ionization = false;
  const sim::detail::MassVariance mv(c, 1e6, 1e16, 400);
  auto mean_offset = [&](bool conserve) {
    s.photon_conservation = conserve;
    const auto cone = sim::generate_cone(s, c, small_cone_key, MPI_COMM_WORLD);
    double sum = 0;
    std::size_t n = 0;
    for (std::size_t k = 0; k < s.n_los; ++k) {
      const double z = cone.z[k], smin = mv.sigma2(sim::detail::min_halo_mass(s.min_virial_temperature_K, z, c));
      const double budget =
          std::min(1.0, s.ionizing_efficiency * std::erfc(1.686 / (c.growth_factor(z) * std::sqrt(2 * smin))));
      if (budget < 0.05 || budget > 0.95) continue;
      sum += (1 - cone.x_hi_mean[k]) - budget;
      ++n;
    }
    EXPECT_GT(n, 30u);
    return sum / static_cast<double>(n);
  };
  const double with = mean_offset(true), without = mean_offset(false);
  if (world_rank() == 0)
    std::printf("mean (1 - x_HI) - budget over the planes: %.4f with photon conservation, %.4f without\n", with, without);
  EXPECT_NEAR(with, 0.0, 0.03);
  EXPECT_LT(without, with - 0.03);  // the plain excursion set ionizes less than its budget
}

// The mass-dependent source model (Park et al. 2019 form) drives the same fields; a larger
// turnover mass suppresses the small haloes, so at the same redshift there is less Lyman-α
// coupling and the gas is colder (fact of the trade: later cosmic dawn).
TEST(SimDawn, MassDependentSourcesAndTheirTurnover) {
  const cosmo::Cosmology c;
  auto s = dawn_cone();
  s.model = sim::SourceModel::mass_dependent;
  s.uniform_density = true;
  s.spin.xray_luminosity_erg_s_per_msun_yr = 1e41;
  const auto low = sim::generate_cone(s, c, small_cone_key, MPI_COMM_WORLD);
  s.turnover_mass_msun = 1e10;
  const auto high = sim::generate_cone(s, c, small_cone_key, MPI_COMM_WORLD);
  for (double v : low.delta_tb_mK.data) ASSERT_TRUE(std::isfinite(v));
  EXPECT_GT(low.x_alpha_mean.front(), 0.0);
  EXPECT_LT(high.x_alpha_mean.front(), low.x_alpha_mean.front());
  EXPECT_LT(high.tk_mean_K.front(), low.tk_mean_K.front());
}
