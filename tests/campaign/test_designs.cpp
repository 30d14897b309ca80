// Unit-cube design generators: Latin hypercube strata, Sobol structure, determinism.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <set>

#include "campaign/designs.hpp"

namespace sc = spinflip::campaign;
namespace rng = spinflip::rng;

namespace {
rng::CounterRng scramble_rng(std::uint64_t seed, std::uint64_t block = 0) {
  return rng::CounterRng({seed, block, 0}, rng::Stream::design_scramble);
}
}  // namespace

TEST(LatinHypercube, OnePointPerStratumInEveryDimension) {
  // Defining property of a Latin hypercube (McKay, Beckman & Conover 1979).
  for (bool scramble : {true, false}) {
    const std::size_t n = 37, d = 5;
    auto u = sc::latin_hypercube(n, d, scramble, scramble_rng(11));
    ASSERT_EQ(u.size(), n * d);
    for (std::size_t j = 0; j < d; ++j) {
      std::set<std::size_t> strata;
      for (std::size_t i = 0; i < n; ++i) {
        const double x = u[i * d + j];
        ASSERT_GE(x, 0.0);
        ASSERT_LT(x, 1.0);
        strata.insert(static_cast<std::size_t>(x * static_cast<double>(n)));
        if (!scramble) {  // centred variant: the stratum midpoint exactly
          const double k = std::floor(x * static_cast<double>(n));
          EXPECT_DOUBLE_EQ(x, (k + 0.5) / static_cast<double>(n));
        }
      }
      EXPECT_EQ(strata.size(), n) << "dimension " << j;
    }
  }
}

TEST(LatinHypercube, DeterministicPerSeedAndDifferentAcrossSeeds) {
  auto a = sc::latin_hypercube(20, 3, true, scramble_rng(5));
  auto b = sc::latin_hypercube(20, 3, true, scramble_rng(5));
  auto c = sc::latin_hypercube(20, 3, true, scramble_rng(6));
  auto e = sc::latin_hypercube(20, 3, true, scramble_rng(5, 1));
  EXPECT_EQ(a, b);
  EXPECT_NE(a, c);
  EXPECT_NE(a, e);
}

TEST(Sobol, FirstPointsOfTheFirstTwoDimensions) {
  // Gray-code-ordered Sobol points, dimensions 1 and 2 (from memory; the python test
  // compares all 21 dimensions with scipy.stats.qmc.Sobol(scramble=False) exactly).
  const double d0[] = {0, 0.5, 0.75, 0.25, 0.375, 0.875, 0.625, 0.125};
  const double d1[] = {0, 0.5, 0.25, 0.75, 0.375, 0.875, 0.125, 0.625};
  auto u = sc::sobol(8, 2, false, scramble_rng(1));
  for (std::size_t i = 0; i < 8; ++i) {
    EXPECT_EQ(u[i * 2], d0[i]) << i;
    EXPECT_EQ(u[i * 2 + 1], d1[i]) << i;
  }
}

TEST(Sobol, EveryPowerOfTwoPrefixIsStratifiedInEachDimension) {
  // Each one-dimensional projection of the first 2^m Sobol points has one point in every
  // interval [k/2^m, (k+1)/2^m) (Sobol 1967, a (0,m,1)-net); linear matrix scrambling and a
  // digital shift keep the net property (Matoušek 1998; Owen 1995).
  const std::size_t d = sc::sobol_max_dimension();
  for (bool scramble : {false, true}) {
    auto u = sc::sobol(1024, d, scramble, scramble_rng(99));
    for (std::size_t m = 1; m <= 10; ++m) {
      const std::size_t n = std::size_t{1} << m;
      for (std::size_t j = 0; j < d; ++j) {
        std::set<std::size_t> cells;
        for (std::size_t i = 0; i < n; ++i) cells.insert(static_cast<std::size_t>(u[i * d + j] * static_cast<double>(n)));
        ASSERT_EQ(cells.size(), n) << "m=" << m << " dim " << j << " scramble " << scramble;
      }
    }
  }
}

TEST(Sobol, TwoDimensionalProjectionIsANetForTheFirstPair) {
  // Dimensions 1 and 2 form a (0,m,2)-net in base 2 (Sobol 1967): every elementary box of
  // area 2^-m (2^a × 2^(m-a) grid) holds exactly one of the first 2^m points.
  auto u = sc::sobol(256, 2, true, scramble_rng(3));
  const std::size_t m = 8, n = 256;
  for (std::size_t a = 0; a <= m; ++a) {
    std::set<std::pair<std::size_t, std::size_t>> boxes;
    for (std::size_t i = 0; i < n; ++i)
      boxes.insert({static_cast<std::size_t>(u[i * 2] * std::ldexp(1.0, static_cast<int>(a))),
                    static_cast<std::size_t>(u[i * 2 + 1] * std::ldexp(1.0, static_cast<int>(m - a)))});
    EXPECT_EQ(boxes.size(), n) << "a=" << a;
  }
}

TEST(Sobol, ScrambleDependsOnTheSeed) {
  auto a = sc::sobol(64, 4, true, scramble_rng(1));
  auto b = sc::sobol(64, 4, true, scramble_rng(1));
  auto c = sc::sobol(64, 4, true, scramble_rng(2));
  EXPECT_EQ(a, b);
  EXPECT_NE(a, c);
  auto plain = sc::sobol(64, 4, false, scramble_rng(1));
  EXPECT_NE(a, plain);
}

TEST(ToPhysical, LinearAndLogScales) {
  sc::Parameter lin{.name = "a", .min = 2, .max = 6};
  EXPECT_DOUBLE_EQ(sc::to_physical(lin, 0.25), 3.0);
  sc::Parameter lg{.name = "b", .min = 10, .max = 1000, .log = true};
  EXPECT_NEAR(sc::to_physical(lg, 0.5), 100.0, 1e-12);  // geometric midpoint (float rounding)
  EXPECT_DOUBLE_EQ(sc::to_physical(lg, 0.0), 10.0);
  EXPECT_DOUBLE_EQ(sc::to_physical(lg, 1.0), 1000.0);
}
