#include <gtest/gtest.h>

#include <cmath>

#include "core/rng.hpp"

using namespace spinflip::rng;

TEST(Rng, SameKeySameBitsWhateverTheOrder) {
  CounterRng a({42, 3, 7}, Stream::initial_conditions);
  CounterRng b({42, 3, 7}, Stream::initial_conditions);
  for (std::uint64_t i = 1000; i-- > 0;) EXPECT_EQ(a.bits(i), b.bits(999 - (999 - i)));
  EXPECT_EQ(a.normal_pair(12345)[0], b.normal_pair(12345)[0]);
}

TEST(Rng, KeysSeparateStreams) {
  CounterRng base({42, 3, 7}, Stream::initial_conditions);
  EXPECT_NE(base.bits(0), CounterRng({43, 3, 7}, Stream::initial_conditions).bits(0));
  EXPECT_NE(base.bits(0), CounterRng({42, 4, 7}, Stream::initial_conditions).bits(0));
  EXPECT_NE(base.bits(0), CounterRng({42, 3, 8}, Stream::initial_conditions).bits(0));
  EXPECT_NE(base.bits(0), CounterRng({42, 3, 7}, noise_stream(0)).bits(0));
}

TEST(Rng, NormalMoments) {
  // Sampling scatter of the mean of n=2e5 unit normals is 1/sqrt(n) = 0.0022;
  // allow 5 sigma. Variance scatter sqrt(2/n) = 0.0032.
  CounterRng r({1, 0, 0}, Stream::initial_conditions);
  const int n = 100000;
  double sum = 0, sum2 = 0;
  for (int i = 0; i < n; ++i) {
    auto g = r.normal_pair(static_cast<std::uint64_t>(i));
    sum += g[0] + g[1];
    sum2 += g[0] * g[0] + g[1] * g[1];
  }
  double mean = sum / (2 * n), var = sum2 / (2 * n) - mean * mean;
  EXPECT_NEAR(mean, 0.0, 5 * 0.0023);
  EXPECT_NEAR(var, 1.0, 5 * 0.0032);
  for (int i = 0; i < 1000; ++i) {
    double u = r.uniform(static_cast<std::uint64_t>(i), i % 4);
    EXPECT_GT(u, 0.0);
    EXPECT_LE(u, 1.0);
  }
}
