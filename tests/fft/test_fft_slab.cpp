// A distributed SlabField transform equals the serial transform of the same
// global field, slab by slab (FFTW-MPI non-transposed layout).
#include <gtest/gtest.h>
#include <mpi.h>

#include <cmath>
#include <complex>

#include "fft/fft.hpp"

using namespace spinflip;

namespace {
float field_value(std::size_t i, std::size_t j, std::size_t k) {
  return float(std::sin(0.37 * double(i) + 1.3 * double(j)) + std::cos(0.11 * double(k * (i + 1))));
}
}  // namespace

TEST(SlabField, DistributedEqualsSerial) {
  const std::array<std::size_t, 3> n{10, 6, 14};
  fft::SlabField serial(n, MPI_COMM_SELF);
  fft::SlabField dist(n, MPI_COMM_WORLD);
  for (std::size_t i = 0; i < n[0]; ++i)
    for (std::size_t j = 0; j < n[1]; ++j)
      for (std::size_t k = 0; k < n[2]; ++k) serial.real(i, j, k) = field_value(i, j, k);
  for (std::size_t i = 0; i < dist.local_n0(); ++i)
    for (std::size_t j = 0; j < n[1]; ++j)
      for (std::size_t k = 0; k < n[2]; ++k) dist.real(i, j, k) = field_value(dist.local_start0() + i, j, k);
  serial.forward();
  dist.forward();
  double worst = 0;
  for (std::size_t i = 0; i < dist.local_n0(); ++i)
    for (std::size_t j = 0; j < n[1]; ++j)
      for (std::size_t k = 0; k < dist.half_n2(); ++k)
        worst = std::max(worst, double(std::abs(dist.mode(i, j, k) - serial.mode(dist.local_start0() + i, j, k))));
  EXPECT_LT(worst, 1e-3);  // float rounding on |X| ~ 10²
  dist.inverse();
  const double N = double(n[0] * n[1] * n[2]);
  for (std::size_t i = 0; i < dist.local_n0(); ++i)
    for (std::size_t j = 0; j < n[1]; ++j)
      for (std::size_t k = 0; k < n[2]; ++k)
        EXPECT_NEAR(dist.real(i, j, k) / N, field_value(dist.local_start0() + i, j, k), 1e-5);
  // Slabs tile axis 0 exactly.
  unsigned long mine = dist.local_n0(), total = 0;
  MPI_Allreduce(&mine, &total, 1, MPI_UNSIGNED_LONG, MPI_SUM, MPI_COMM_WORLD);
  EXPECT_EQ(total, n[0]);
}
