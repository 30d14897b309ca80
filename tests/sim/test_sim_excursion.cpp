// Unit checks of the excursion-set pieces against closed forms.
#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <numbers>

#include "cosmo/cosmology.hpp"
#include "sim/excursion_set.hpp"

using namespace spinflip;
using namespace spinflip::sim::detail;

TEST(Excursion, ErfcInverseRoundTrip) {
  for (double y : {1e-6, 0.01, 1.0 / 30.0, 0.5, 1.0, 1.7})
    EXPECT_NEAR(std::erfc(erfc_inverse(y)), y, 1e-12 * std::max(1.0, y)) << y;  // bisection to 1e-15 in x
}

TEST(Excursion, ConstantYieldIsZetaTimesCollapsedFraction) {
  const cosmo::Cosmology c;
  const MassVariance mv(c, 1e5, 1e16, 300);
  Efficiency e;
  e.zeta = 25;
  const double s_r = mv.sigma2(1e13), s_min = mv.sigma2(1e8);
  for (double delta : {-0.5, 0.0, 0.8, 1.5}) {
    const double growth = 0.12;
    const double u = (delta_collapse / growth - delta) / std::sqrt(2 * (s_min - s_r));
    // EPS: F = ζ f_coll with f_coll = erfc[(δc/D − δ)/√(2(σ²min − σ²R))] (Lacey & Cole 1993; DESIGN.md §4).
    EXPECT_DOUBLE_EQ(ionizing_yield(e, mv, u, s_r, s_min), 25 * collapsed_fraction(delta, growth, s_r, s_min));
  }
  EXPECT_EQ(collapsed_fraction(20.0, 0.1, s_r, s_min), 1.0);  // δ above the barrier: all mass collapsed
  EXPECT_EQ(collapsed_fraction(0.0, 0.1, s_min, s_r), 0.0);   // region smaller than the smallest halo
}

TEST(Excursion, MassDependentYieldWithFlatEfficiencyEqualsErfc) {
  // With both slopes 0, no turnover and f*·fesc·Nγ = ζ the mass-dependent integral must reduce to ζ erfc(u_min):
  // (2/√π)∫_u^∞ e^{-t²} dt = erfc(u) — tests the Gauss–Legendre quadrature and its truncation.
  const cosmo::Cosmology c;
  const MassVariance mv(c, 1e5, 1e16, 300);
  Efficiency e;
  e.mass_dependent = true;
  e.photons_per_baryon = 400;
  e.fstar10 = 0.25;
  e.fesc10 = 0.2;
  e.alpha_star = e.alpha_esc = 0;
  e.m_turn_msun = 1e-30;
  const double s_r = mv.sigma2(1e12), s_min = mv.sigma2(1e8);
  for (double u : {0.0, 0.3, 1.0, 2.5, 5.0})
    EXPECT_NEAR(ionizing_yield(e, mv, u, s_r, s_min), 20 * std::erfc(u), 2e-7 * 20 * std::erfc(u) + 1e-12)
        << u;  // 48-point Gauss–Legendre on a smooth integrand: ~1e-9 relative, truncation e^-8·... below 2e-7
}

TEST(Excursion, MassVarianceInverse) {
  const cosmo::Cosmology c;
  const MassVariance mv(c, 1e4, 1e17, 480);
  for (double m : {1e5, 3e7, 1e10, 2e13, 5e16}) {
    EXPECT_NEAR(mv.mass_of_sigma2(mv.sigma2(m)) / m, 1.0, 2e-3);  // linear interpolation of two tables
    EXPECT_NEAR(std::sqrt(mv.sigma2(m)) / c.sigma_M(m), 1.0, 1e-4);  // log-log interpolation of a smooth σ(M)
  }
}

TEST(Excursion, BarrierInverse) {
  // A linear barrier δ(z) = 1 + 0.5 (z − 6) on 6..10, with a dip at one node that the running maximum removes.
  std::vector<double> z{6, 7, 8, 9, 10}, d{1.0, 1.5, 1.2, 2.5, 3.0};
  const Barrier b(z, d);
  EXPECT_EQ(b.delta_crit()[2], 1.5);
  EXPECT_EQ(b.redshift_reached(0.99), -std::numeric_limits<double>::infinity());
  EXPECT_NEAR(b.redshift_reached(1.25), 6.5, 1e-3);  // inverse sampled on 4096 nodes: error ≲ Δδ
  EXPECT_NEAR(b.redshift_reached(1.51), 8.01, 1e-3);  // past the flat part: the highest z reached
  EXPECT_NEAR(b.redshift_reached(2.0), 8.5, 1e-3);
  EXPECT_EQ(b.redshift_reached(99.0), 10.0);
  double prev = -std::numeric_limits<double>::infinity();
  for (double x = 0.9; x < 3.2; x += 0.001) {  // non-decreasing in δ
    double r = b.redshift_reached(x);
    EXPECT_GE(r, prev);
    prev = r;
  }
}

TEST(Excursion, CriticalUSolvesYieldEqualsOne) {
  const cosmo::Cosmology c;
  const MassVariance mv(c, 1e5, 1e16, 300);
  Efficiency e;
  e.mass_dependent = true;  // fiducial power laws of Park et al. (2019) (from memory)
  const double s_r = mv.sigma2(1e13), s_min = mv.sigma2(1e8);
  const double u = critical_u(e, mv, s_r, s_min);
  ASSERT_GT(u, 0);
  EXPECT_NEAR(ionizing_yield(e, mv, u, s_r, s_min), 1.0, 1e-9);  // bisection to 12/2^40
  e.photons_per_baryon = 1e-3;  // far too few photons: never ionizes
  EXPECT_LT(critical_u(e, mv, s_r, s_min), 0);
}
