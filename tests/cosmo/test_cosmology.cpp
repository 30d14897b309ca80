#include "cosmo/cosmology.hpp"

#include <gtest/gtest.h>

#include <cmath>
#include <numbers>

using namespace spinflip;

namespace {
cosmo::Parameters no_radiation() {
  cosmo::Parameters p;
  p.T_cmb_K = 0.0;  // Ωr = 0: matter + Λ only
  p.n_eff = 0.0;
  return p;
}
// Heath (1977) / Carroll, Press & Turner (1992): for matter + Λ the growing
// mode is D(z) ∝ E(z) ∫_z^∞ (1+z')/E(z')³ dz'. Integrated in a with Simpson.
double heath_growth(const cosmo::Cosmology& c, double z) {
  const double a_max = 1.0 / (1.0 + z);
  const int n = 20000;
  const double h = a_max / n;
  auto f = [&](double a) {
    if (a <= 0) return 0.0;
    const double e = c.E(1.0 / a - 1.0);
    return 1.0 / std::pow(a * e, 3);
  };
  double s = f(0) + f(a_max);
  for (int i = 1; i < n; ++i) s += (i % 2 ? 4.0 : 2.0) * f(i * h);
  return c.E(z) * s * h / 3.0;
}
}  // namespace

TEST(Cosmology, GrowthMatchesHeathIntegralWithoutRadiation) {
  const cosmo::Cosmology c(no_radiation());
  EXPECT_DOUBLE_EQ(c.omega_r(), 0.0);
  const double d0 = heath_growth(c, 0.0);
  for (double z : {0.5, 2.0, 6.0, 10.0, 30.0}) {
    EXPECT_NEAR(c.growth_factor(z), heath_growth(c, z) / d0, 2e-6) << "z=" << z;
  }
  // f = dlnD/dlna ≈ Ωm(z)^0.55 to better than 1% (Linder 2005, common practice).
  for (double z : {0.0, 1.0, 3.0}) EXPECT_NEAR(c.growth_rate(z), std::pow(c.omega_m_at(z), 0.55), 0.01);
}

// Carroll, Press & Turner (1992) eq. 29 approximation, stated good to ~1%:
// g = 2.5 Ωm / [Ωm^{4/7} − ΩΛ + (1 + Ωm/2)(1 + ΩΛ/70)], D = g(z) / (g(0)(1+z)).
TEST(Cosmology, GrowthWithinOnePercentOfCarrollPressTurner) {
  const cosmo::Cosmology c;
  auto g = [&](double z) {
    const double om = c.omega_m_at(z), e = c.E(z), ol = c.omega_lambda() / (e * e);
    return 2.5 * om / (std::pow(om, 4.0 / 7.0) - ol + (1 + om / 2) * (1 + ol / 70));
  };
  for (double z : {0.5, 1.0, 3.0, 8.0, 15.0}) EXPECT_NEAR(c.growth_factor(z), g(z) / (g(0) * (1 + z)), 0.01 * c.growth_factor(z)) << z;
}

// Radiation (0.3% of the matter density at z = 10) slows growth at early times,
// so less growth happens between z = 10 and today and the normalised D(10) is higher.
TEST(Cosmology, RadiationSlowsEarlyGrowthSlightly) {
  const cosmo::Cosmology with(cosmo::Parameters{}), without(no_radiation());
  EXPECT_GT(with.omega_r(), 8e-5);  // Ωr h² ≈ 4.2e-5 (from memory)
  EXPECT_LT(with.omega_r(), 1e-4);
  const double r = with.growth_factor(10.0) / without.growth_factor(10.0);
  EXPECT_GT(r, 1.0);
  EXPECT_LT(r, 1.01);
}

TEST(Cosmology, DistanceInverseAndSmallZLimit) {
  const cosmo::Cosmology c;
  for (double z : {0.01, 1.0, 7.5, 12.0, 35.0}) {
    const double d = c.comoving_distance_mpc(z);
    EXPECT_NEAR(c.redshift_at_comoving_distance(d), z, 1e-9 * (1 + z));
  }
  // Hubble law at small z: D ≈ cz/H0 (common practice).
  const double z = 1e-4;
  EXPECT_NEAR(c.comoving_distance_mpc(z), cosmo::c_km_s * z / (100 * c.parameters().h), 1e-3);
  EXPECT_THROW(c.comoving_distance_mpc(-1.0), std::exception);
}

TEST(Cosmology, PowerSpectrumNormalisedToSigma8) {
  const cosmo::Cosmology c;
  EXPECT_NEAR(c.sigma_R(8.0 / c.parameters().h), c.parameters().sigma8, 1e-6);
  EXPECT_NEAR(c.sigma_R(8.0 / c.parameters().h, 3.0) / c.sigma_R(8.0 / c.parameters().h), c.growth_factor(3.0), 1e-12);
  EXPECT_NEAR(c.transfer(1e-6), 1.0, 1e-4);  // T → 1 on large scales (E&H 1998)
  // σ(M) falls with M; dσ²/dM < 0 and matches a finite difference.
  const double m = 1e10, dm = 1e7;
  const double fd = (std::pow(c.sigma_M(m + dm), 2) - std::pow(c.sigma_M(m - dm), 2)) / (2 * dm);
  EXPECT_LT(c.dsigma2_dM(m), 0.0);
  EXPECT_NEAR(c.dsigma2_dM(m), fd, 1e-3 * std::abs(fd));
  EXPECT_NEAR(c.radius_of_mass(c.mass_of_radius(3.0)), 3.0, 1e-12);
}

TEST(Cosmology, EisensteinHuScales) {
  const cosmo::Cosmology c;
  const auto& p = c.parameters();
  const double om = p.omega_m * p.h * p.h, ob = p.omega_b * p.h * p.h;
  // E&H (1998) eq. 26 approximates the sound horizon of eq. 6 to ~2%.
  const double s_fit = 44.5 * std::log(9.83 / om) / std::sqrt(1 + 10 * std::pow(ob, 0.75));
  EXPECT_NEAR(c.sound_horizon_mpc() / s_fit, 1.0, 0.02);
  // E&H (1998) eq. 7, the Silk damping scale as printed.
  const double k_silk = 1.6 * std::pow(ob, 0.52) * std::pow(om, 0.73) * (1 + std::pow(10.4 * om, -0.95));
  EXPECT_NEAR(c.k_silk_mpc(), k_silk, 1e-12 * k_silk);
  // Damping sets in well inside the sound horizon: k_silk s ≫ 1.
  EXPECT_GT(c.k_silk_mpc() * c.sound_horizon_mpc(), 5.0);
  // Boltzmann codes give r_drag ≈ 147 Mpc for Planck 2018 (from memory); the E&H eq. 4 drag
  // redshift puts their eq. 6 a few per cent higher.
  EXPECT_GT(c.sound_horizon_mpc(), 145.0);
  EXPECT_LT(c.sound_horizon_mpc(), 155.0);
  // With and without wiggles the transfer functions agree on large and small scales.
  cosmo::Parameters nw = p;
  nw.baryon_wiggles = false;
  const cosmo::Cosmology smooth(nw);
  EXPECT_NEAR(c.transfer(1e-3) / smooth.transfer(1e-3), 1.0, 0.01);
  EXPECT_NEAR(c.transfer(5.0) / smooth.transfer(5.0), 1.0, 0.05);
}

TEST(Cosmology, VirialMassBarkanaLoeb) {
  const cosmo::Cosmology c;
  // Barkana & Loeb (2001) eq. 26: atomic cooling (1e4 K) at z = 10 is ~1e8 M☉ (from memory).
  const double m = cosmo::virial_mass_msun(1e4, 10.0, c, 0.59);
  EXPECT_GT(m, 5e7);
  EXPECT_LT(m, 1.5e8);
  EXPECT_NEAR(cosmo::virial_temperature_K(m, 10.0, c, 0.59), 1e4, 1e-6);
  // T ∝ M^{2/3} (1+z) at high z where Ωm(z) → 1.
  EXPECT_NEAR(cosmo::virial_temperature_K(8 * m, 20.0, c) / cosmo::virial_temperature_K(m, 20.0, c), 4.0, 1e-9);
}

TEST(Cosmology, FrequencyAndBrightnessPrefactor) {
  EXPECT_DOUBLE_EQ(cosmo::frequency_MHz(0.0), 1420.405751768);
  EXPECT_NEAR(cosmo::redshift_at_frequency(cosmo::frequency_MHz(8.3)), 8.3, 1e-12);
  const cosmo::Cosmology c;
  const auto& p = c.parameters();
  // Furlanetto, Oh & Briggs (2006) eq. 1 prefactor.
  const double h2 = p.h * p.h;
  const double expect = 27.0 * (p.omega_b * h2 / 0.023) * std::sqrt(0.15 / (p.omega_m * h2) * 0.9);
  EXPECT_NEAR(cosmo::tb_prefactor_mK(8.0, c), expect, 1e-12);
  EXPECT_GT(expect, 20.0);  // ~25 mK at z = 8 for Planck parameters (from memory)
  EXPECT_LT(expect, 30.0);
}
