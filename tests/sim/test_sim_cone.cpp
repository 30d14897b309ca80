// Light-cone generator checks, run at 1 and 2 ranks (the group is MPI_COMM_WORLD).
#include <gtest/gtest.h>
#include <mpi.h>

#include <algorithm>
#include <cmath>
#include <cstring>
#include <numbers>
#include <vector>

#include "cosmo/cosmology.hpp"
#include "fft/fft.hpp"
#include "sim/excursion_set.hpp"
#include "sim/initial_conditions.hpp"
#include "sim/lightcone.hpp"
#include "common.hpp"
#include "../support/mpi_helpers.hpp"

using namespace spinflip;
using test_support::small_cone;
using test_support::sum_all;
using test_support::world_rank;

namespace {

const rng::EntryKey& key = test_support::small_cone_key;

}  // namespace

// Gaussian-random-field statistics (common practice): in a bin holding N independent modes the
// mean of |δ̃|²/V has mean P̄ (the input P averaged over the same modes) and variance P̄²/N, so
// χ² = Σ_b (P̂_b − P̄_b)² N_b / P̄_b² follows χ² with n_bins degrees of freedom.
TEST(SimCone, DrawnPowerSpectrumMatchesInputWithinCosmicVariance) {
  const cosmo::Cosmology c;
  const std::array<std::size_t, 3> shape{32, 32, 96};
  const double dx = 4.0;
  fft::SlabField f(shape, MPI_COMM_WORLD);
  sim::detail::draw_linear_density(f, dx, c, key);
  f.inverse();  // δ(x) in real space, as the generator sees it
  f.forward();  // DFT Σ δ e^{-ik·x}
  const double n = 32.0 * 32.0 * 96.0, dv = dx * dx * dx, vol = n * dv;
  const std::size_t nb = 10;
  const double kf = 2 * std::numbers::pi / (32 * dx), kn = std::numbers::pi / dx;
  std::vector<double> sum_p(nb, 0), sum_in(nb, 0), count(nb, 0);
  for (std::size_t i = 0; i < f.local_n0(); ++i)
    for (std::size_t j = 0; j < shape[1]; ++j)
      for (std::size_t kh = 0; kh < f.half_n2(); ++kh) {
        const double k0 = sim::detail::wavenumber(f.local_start0() + i, shape[0], dx);
        const double k1 = sim::detail::wavenumber(j, shape[1], dx);
        const double k2 = 2 * std::numbers::pi * static_cast<double>(kh) / (96 * dx);
        const double k = std::sqrt(k0 * k0 + k1 * k1 + k2 * k2);
        if (k < kf || k >= kn) continue;
        // Half-space modes: kh = 0 and Nyquist planes hold each pair ±k twice, others once. Weight
        // 1/2 on those planes so that `count` counts independent complex modes.
        const double w = (kh == 0 || kh == f.half_n2() - 1) ? 0.5 : 1.0;
        const auto b = static_cast<std::size_t>((k - kf) / (kn - kf) * static_cast<double>(nb));
        const double pk = std::norm(f.mode(i, j, kh)) * dv * dv / vol;
        sum_p[b] += w * pk;
        sum_in[b] += w * c.linear_power(k, 0.0);
        count[b] += w;
      }
  MPI_Allreduce(MPI_IN_PLACE, sum_p.data(), static_cast<int>(nb), MPI_DOUBLE, MPI_SUM, MPI_COMM_WORLD);
  MPI_Allreduce(MPI_IN_PLACE, sum_in.data(), static_cast<int>(nb), MPI_DOUBLE, MPI_SUM, MPI_COMM_WORLD);
  MPI_Allreduce(MPI_IN_PLACE, count.data(), static_cast<int>(nb), MPI_DOUBLE, MPI_SUM, MPI_COMM_WORLD);
  double chi2 = 0;
  for (std::size_t b = 0; b < nb; ++b) {
    ASSERT_GT(count[b], 10);
    const double p_hat = sum_p[b] / count[b], p_in = sum_in[b] / count[b];
    chi2 += (p_hat - p_in) * (p_hat - p_in) * count[b] / (p_in * p_in);
  }
  // 99.9% point of χ² with 10 degrees of freedom is 29.59 (scipy.stats.chi2.ppf(0.999, 10)).
  EXPECT_LT(chi2, 29.59);
  EXPECT_GT(chi2, 1.48);  // 0.1% point: a field that copies P(k) exactly (no scatter) is wrong too
}

// Furlanetto, Oh & Briggs (2006) eq. 1 with x_HI = 1, T_S >> T_CMB, no velocity term:
// δT_b = 27 mK (1+δ) (Ωb h²/0.023) [0.15/(Ωm h²) (1+z)/10]^½, so its plane mean is the prefactor
// times the plane mean of (1+δ).
TEST(SimCone, NeutralConeMeanIsPrefactorTimesMeanDensity) {
  const cosmo::Cosmology c;
  auto s = small_cone();
  s.reionization = false;
  s.velocity_gradient = false;
  s.keep_density = true;
  const auto cone = sim::generate_cone(s, c, key, MPI_COMM_WORLD);
  const auto& p = c.parameters();
  const double obh2 = p.omega_b * p.h * p.h, omh2 = p.omega_m * p.h * p.h;
  for (std::size_t k = 0; k < s.n_los; k += 7) {
    double local = 0;
    for (std::size_t i = 0; i < cone.local_n0; ++i)
      for (std::size_t j = 0; j < s.n_perp; ++j) local += 1.0 + (*cone.density)(i, j, k);
    const double mean1pd = sum_all(local) / double(s.n_perp * s.n_perp);
    const double pref = 27.0 * (obh2 / 0.023) * std::sqrt(0.15 / omh2 * (1 + cone.z[k]) / 10.0);
    EXPECT_NEAR(cone.tb_mean_mK[k] / (pref * mean1pd), 1.0, 1e-3) << k;  // the tolerance
    EXPECT_DOUBLE_EQ(cone.x_hi_mean[k], 1.0);
  }
  // Axes: ν = 1420.405751768 MHz/(1+z), cells contiguous in comoving distance.
  for (std::size_t k = 0; k < s.n_los; ++k) {
    EXPECT_NEAR(cone.freq_MHz[k], 1420.405751768 / (1 + cone.z[k]), 1e-9);
    EXPECT_NEAR(c.comoving_distance_mpc(cone.z[k]), cone.distance_mpc[k], 1e-3 * s.cell_mpc);
  }
  EXPECT_GT(cone.z.back(), s.z_max);
  EXPECT_NEAR(cone.distance_mpc[0] - c.comoving_distance_mpc(s.z_min), 0.5 * s.cell_mpc, 1e-6);
}

TEST(SimCone, NeutralFractionBoundedAndReionizationProceedsTowardLowRedshift) {
  const cosmo::Cosmology c;
  auto s = small_cone();
  s.keep_x_hi = true;
  s.keep_z_ion = true;
  const auto cone = sim::generate_cone(s, c, key, MPI_COMM_WORLD);
  for (float x : cone.x_hi->data) {
    EXPECT_GE(x, 0.0f);
    EXPECT_LE(x, 1.0f);
  }
  for (double x : cone.x_hi_mean) {
    EXPECT_GE(x, 0.0);
    EXPECT_LE(x, 1.0);
  }
  // Each cell's neutral fraction from z_ion is a step in z: the volume-mean history
  // x_HI(z) = fraction of cells with z_ion < z cannot rise toward low z (exact, no tolerance).
  double prev = 2;
  for (double z = cone.z.back(); z >= cone.z.front(); z -= 0.01) {
    double local = 0;
    for (float zi : cone.z_ion->data) local += zi < z ? 1.0 : 0.0;
    const double x = sum_all(local) / double(s.n_perp * s.n_perp * s.n_los);
    EXPECT_LE(x, prev);
    prev = x;
  }
  // The cone's plane means follow the same trend, up to the scatter of 32² cells per plane: compare
  // the near and far quarters.
  double near = 0, far = 0;
  for (std::size_t k = 0; k < s.n_los / 4; ++k) {
    near += cone.x_hi_mean[k];
    far += cone.x_hi_mean[s.n_los - 1 - k];
  }
  EXPECT_LT(near, far);
}

TEST(SimCone, LargerEfficiencyReionizesEarlier) {
  const cosmo::Cosmology c;
  auto s = small_cone();
  s.keep_x_hi = true;
  s.keep_z_ion = true;
  s.ionizing_efficiency = 20;
  const auto lo = sim::generate_cone(s, c, key, MPI_COMM_WORLD);
  s.ionizing_efficiency = 40;
  const auto hi = sim::generate_cone(s, c, key, MPI_COMM_WORLD);
  // Same seed: a larger ζ lowers every barrier, so z_ion and the ionized fraction rise cell by cell.
  for (std::size_t q = 0; q < hi.x_hi->data.size(); ++q) {
    EXPECT_GE(hi.z_ion->data[q], lo.z_ion->data[q]);
    EXPECT_LE(hi.x_hi->data[q], lo.x_hi->data[q] + 1e-6f);  // float rounding of 1 − F
  }
  double a = 0, b = 0;
  for (std::size_t k = 0; k < s.n_los; ++k) {
    a += lo.x_hi_mean[k];
    b += hi.x_hi_mean[k];
  }
  EXPECT_LT(b, a);
}

// While bubbles are rare, the mean ionized fraction is the mean over cells of the cells' own
// yield ζ f_coll(δ_cell), and averaging the EPS conditional collapsed fraction over Gaussian δ_cell
// of variance σ²(R_cell) gives the unconditional (Press–Schechter) f̄_coll = erfc[δc/(√2 D σ_min)].
// Tolerance 30%: the grid's cell-scale variance differs from the continuous top-hat σ²(R_cell)
// (the box lacks modes beyond its Nyquist and fundamental wavenumbers), and bubbles add a little.
TEST(SimCone, MeanIonizedFractionTracksZetaTimesMeanCollapsedFraction) {
  const cosmo::Cosmology c;
  auto s = small_cone();
  s.z_min = 12.0;
  s.z_max = 13.0;
  s.ionizing_efficiency = 30;
  s.velocity_gradient = false;
  const auto cone = sim::generate_cone(s, c, key, MPI_COMM_WORLD);
  double sum_x = 0, sum_f = 0;
  std::size_t used = 0;
  for (std::size_t k = 0; k < s.n_los; ++k) {
    const double z = cone.z[k];
    const double m_min = cosmo::virial_mass_msun(s.min_virial_temperature_K, z, c, 0.59);
    const double f = std::erfc(sim::detail::delta_collapse / (std::sqrt(2.0) * c.growth_factor(z) * c.sigma_M(m_min)));
    if (s.ionizing_efficiency * f > 0.1) continue;  // "while small"
    sum_x += 1.0 - cone.x_hi_mean[k];
    sum_f += s.ionizing_efficiency * f;
    ++used;
  }
  ASSERT_GT(used, s.n_los / 2);
  ASSERT_GT(sum_f / double(used), 1e-3);  // the band is chosen so that the check is not 0 ≈ 0
  EXPECT_NEAR(sum_x / sum_f, 1.0, 0.3);
}

// DESIGN.md §3: the drawn field (the real-space white noise, before any transform)
// is the same bit for bit on one rank and on any slab decomposition of the box,
// including an odd line-of-sight length where counter pairs straddle rows.
TEST(SimCone, DrawnFieldIdenticalOnOneRankAndOnSlabs) {
  for (const std::array<std::size_t, 3> shape : {std::array<std::size_t, 3>{12, 10, 36}, {9, 7, 15}}) {
    fft::SlabField serial(shape, MPI_COMM_SELF), slabs(shape, MPI_COMM_WORLD);
    sim::detail::draw_white_noise(serial, key);
    sim::detail::draw_white_noise(slabs, key);
    for (std::size_t i = 0; i < slabs.local_n0(); ++i)
      for (std::size_t j = 0; j < shape[1]; ++j)
        EXPECT_EQ(std::memcmp(&slabs.real(i, j, 0), &serial.real(slabs.local_start0() + i, j, 0),
                              shape[2] * sizeof(float)), 0)
            << "row " << slabs.local_start0() + i << "," << j;
  }
}

// Box & Muller (1958): z0 = √(−2 ln u) sin(πx), z1 = √(−2 ln u) cos(πx) for x uniform in (−1, 1),
// u in (0, 1]. The vectorized polynomials are checked against libm's log, sin and cos in double
// on the same float u and x (so only the evaluation differs): float rounding, 2e-6 (1 + |z|).
TEST(SimCone, VectorizedBoxMullerMatchesLibmInDouble) {
  const rng::CounterRng rng(key, rng::Stream::initial_conditions);
  const std::size_t n = 1 << 16;
  std::vector<std::uint32_t> u0(n), u1(n);
  for (std::size_t i = 0; i < n; ++i) {
    const auto b = rng.bits(i);
    u0[i] = static_cast<std::uint32_t>(b[0]);
    u1[i] = static_cast<std::uint32_t>(b[0] >> 32);
  }
  u0[0] = 0x80000000u;  // x = −1 (the end of the range)
  u1[0] = 0;            // u = 2^-32, the deepest tail
  u0[1] = 0x7fffffffu;  // x → +1
  u1[1] = 0xffffffffu;  // u → 1
  std::vector<float> z(2 * n);
  sim::detail::box_muller_pairs(u0.data(), u1.data(), z.data(), n);
  double sum = 0, sum2 = 0;
  for (std::size_t i = 0; i < n; ++i) {
    const float u = static_cast<float>(static_cast<std::int32_t>(u1[i] >> 1)) * 0x1p-31f + 0x1p-32f;
    const float x = static_cast<float>(static_cast<std::int32_t>(u0[i])) * 0x1p-31f + 0x1p-32f;
    const double r = std::sqrt(-2.0 * std::log(static_cast<double>(u)));
    const double a = std::numbers::pi * static_cast<double>(x);
    ASSERT_NEAR(z[2 * i], r * std::sin(a), 2e-6 * (1 + r)) << i;
    ASSERT_NEAR(z[2 * i + 1], r * std::cos(a), 2e-6 * (1 + r)) << i;
    sum += z[2 * i] + z[2 * i + 1];
    sum2 += double(z[2 * i]) * z[2 * i] + double(z[2 * i + 1]) * z[2 * i + 1];
  }
  // Unit normals: the mean of 2n draws is within 5 standard errors of 0, the variance within
  // 5 of 1 (standard error of a normal sample's variance √(2/(2n))); sampling scatter.
  EXPECT_LT(std::abs(sum / (2.0 * n)), 5.0 / std::sqrt(2.0 * n));
  EXPECT_LT(std::abs(sum2 / (2.0 * n) - 1.0), 5.0 * std::sqrt(2.0 / (2.0 * n)));
}

// z_ion is an optional output: asking for it must not change the cone, and a cell is neutral
// (partial ionization off) exactly when its z_ion is below its own redshift (the per-cell flags
// and z_ion use the same barrier lookups).
TEST(SimCone, KeepingZionChangesNothingAndMatchesTheNeutralCells) {
  const cosmo::Cosmology c;
  auto s = small_cone();
  s.partial_ionization = false;
  s.keep_x_hi = true;
  const auto plain = sim::generate_cone(s, c, key, MPI_COMM_WORLD);
  s.keep_z_ion = true;
  const auto with = sim::generate_cone(s, c, key, MPI_COMM_WORLD);
  ASSERT_EQ(plain.delta_tb_mK.data.size(), with.delta_tb_mK.data.size());
  EXPECT_EQ(std::memcmp(plain.delta_tb_mK.data.data(), with.delta_tb_mK.data.data(),
                        plain.delta_tb_mK.data.size() * sizeof(float)), 0);
  std::size_t ionized = 0;
  for (std::size_t q = 0; q < with.x_hi->data.size(); ++q) {
    const std::size_t k = q % s.n_los;
    const bool by_z_ion = static_cast<double>(with.z_ion->data[q]) >= with.z[k];
    EXPECT_EQ(with.x_hi->data[q] == 0.0f, by_z_ion) << q;
    ionized += by_z_ion ? 1 : 0;
  }
  EXPECT_GT(sum_all(static_cast<double>(ionized)), 0.0);  // the check is not vacuous
}

TEST(SimCone, SameEntryOnOneRankAndOnTheGroup) {
  const cosmo::Cosmology c;
  auto s = small_cone();
  const auto group = sim::generate_cone(s, c, key, MPI_COMM_WORLD);
  const auto whole = sim::allgather_cone(group, MPI_COMM_WORLD);
  const auto again = sim::allgather_cone(sim::generate_cone(s, c, key, MPI_COMM_WORLD), MPI_COMM_WORLD);
  // Same group size twice: identical bytes.
  EXPECT_EQ(std::memcmp(whole.data.data(), again.data.data(), whole.data.size() * sizeof(float)), 0);
  if (world_rank() == 0) {
    const auto single = sim::generate_cone(s, c, key, MPI_COMM_SELF);
    ASSERT_EQ(single.delta_tb_mK.data.size(), whole.data.size());
    // Serial vs distributed FFTs differ by float rounding (~1e-6 relative). A cell next to an
    // ionization threshold can flip, so count cells beyond rounding rather than require none.
    std::size_t off = 0;
    for (std::size_t q = 0; q < whole.data.size(); ++q)
      if (std::abs(single.delta_tb_mK.data[q] - whole.data[q]) > 1e-3f + 1e-4f * std::abs(whole.data[q])) ++off;
    EXPECT_LE(off, whole.data.size() / 10000);  // threshold flips: rare (≤ 0.01% of cells)
    for (std::size_t k = 0; k < s.n_los; ++k) EXPECT_NEAR(single.x_hi_mean[k], group.x_hi_mean[k], 2e-3);
  }
}

// Field (1958) / Furlanetto, Oh & Briggs (2006): with Lyα coupling x_α and T_colour = T_K,
// 1/T_S = (1/T_CMB + x_α/T_K)/(1 + x_α); the neutral cone's mean scales by (1 − T_CMB/T_S).
TEST(SimCone, SpinTemperatureHistoryGivesAbsorptionAtHighRedshift) {
  const cosmo::Cosmology c;
  auto s = small_cone();
  s.z_min = 14.0;
  s.z_max = 15.0;
  s.reionization = false;
  s.velocity_gradient = false;
  const auto bright = sim::generate_cone(s, c, key, MPI_COMM_WORLD);
  s.tanh_spin.enabled = true;
  const auto cone = sim::generate_cone(s, c, key, MPI_COMM_WORLD);
  const double t0 = c.parameters().T_cmb_K;
  for (std::size_t k = 0; k < s.n_los; k += 9) {
    const double z = cone.z[k];
    const double t_cmb = t0 * (1 + z);
    const double t_k = t0 * (1 + z) * (1 + z) / 151.0 +
                       s.tanh_spin.heating_temperature_K * 0.5 * (1 - std::tanh((z - s.tanh_spin.heating_redshift) / s.tanh_spin.heating_width));
    const double xa = s.tanh_spin.coupling_strength * 0.5 * (1 - std::tanh((z - s.tanh_spin.coupling_redshift) / s.tanh_spin.coupling_width));
    const double ts = (1 + xa) / (1 / t_cmb + xa / t_k);
    EXPECT_NEAR(cone.tb_mean_mK[k], bright.tb_mean_mK[k] * (1 - t_cmb / ts), 1e-4 * std::abs(bright.tb_mean_mK[k]));
    EXPECT_LT(cone.tb_mean_mK[k], 0.0);  // the gas is colder than the CMB: absorption
  }
}

TEST(SimCone, MassDependentSourcesReionize) {
  const cosmo::Cosmology c;
  auto s = small_cone();
  s.model = sim::SourceModel::mass_dependent;
  s.keep_x_hi = true;
  const auto cone = sim::generate_cone(s, c, key, MPI_COMM_WORLD);
  for (float x : cone.x_hi->data) ASSERT_TRUE(x >= 0.0f && x <= 1.0f);
  auto brighter = s;
  brighter.escape_fraction_at_1e10 = 0.3;  // more photons escape: earlier reionization, cell by cell
  brighter.keep_x_hi = true;
  const auto more = sim::generate_cone(brighter, c, key, MPI_COMM_WORLD);
  double a = 0, b = 0;
  for (std::size_t k = 0; k < s.n_los; ++k) {
    a += cone.x_hi_mean[k];
    b += more.x_hi_mean[k];
  }
  EXPECT_LT(b, a);
  for (std::size_t q = 0; q < more.x_hi->data.size(); ++q) EXPECT_LE(more.x_hi->data[q], cone.x_hi->data[q] + 1e-6f);
}
