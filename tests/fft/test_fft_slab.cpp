// A distributed SlabField transform equals the serial transform of the same
// global field, slab by slab (FFTW-MPI non-transposed layout).
#include <gtest/gtest.h>
#include <mpi.h>

#include <cmath>
#include <complex>
#include <cstring>
#include <string>
#include <vector>

#include "fft/fft.hpp"
#include "fft/planning.hpp"

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

// One wisdom for every rank (DESIGN.md §3, §11): made on rank 0 (serial plans) and by
// the world together (the slab plans), shared before any plan of the "run"; then every
// rank plans from it, and the same serial transform gives the same bytes on every rank.
TEST(SlabField, SharedWisdomGivesEveryRankTheSamePlans) {
  int rank = 0;
  MPI_Comm_rank(MPI_COMM_WORLD, &rank);
  fft::set_planning({fft::Rigor::measure, 5.0});
  const std::array<std::size_t, 3> n{12, 8, 16};
  const std::size_t m0 = 32, m1 = 48;
  std::vector<fft::cfloat> x(m0 * m1);
  for (std::size_t i = 0; i < x.size(); ++i) x[i] = {float(std::sin(0.1 * double(i))), float(i % 5)};
  fft::Buffer<fft::cfloat> in(m0 * m1), out(m0 * m1);
  std::copy(x.begin(), x.end(), in.data());
  const auto shared = fft::share_wisdom(MPI_COMM_WORLD, std::nullopt, std::nullopt, [&] {
    { const fft::SlabField f(n, MPI_COMM_WORLD); }
    fft::gather_wisdom(MPI_COMM_WORLD);
    if (rank == 0) fft::c2c_2d(m0, m1, in.data(), out.data(), fft::Direction::forward);
  });
  // Every rank holds rank 0's wisdom.
  std::string sha0 = shared.sha256;
  sha0.resize(64);
  MPI_Bcast(sha0.data(), 64, MPI_CHAR, 0, MPI_COMM_WORLD);
  EXPECT_EQ(shared.sha256, sha0);
  fft::clear_plan_records();
  fft::SlabField field(n, MPI_COMM_WORLD);
  fft::c2c_2d(m0, m1, in.data(), out.data(), fft::Direction::forward);
  for (const auto& r : fft::plan_records()) EXPECT_EQ(r.how, "from wisdom") << r.problem;
  std::vector<fft::cfloat> mine(out.data(), out.data() + out.size()), root = mine;
  MPI_Bcast(root.data(), static_cast<int>(2 * root.size()), MPI_FLOAT, 0, MPI_COMM_WORLD);
  EXPECT_EQ(std::memcmp(mine.data(), root.data(), mine.size() * sizeof(fft::cfloat)), 0);
  fft::set_wisdom_only(false);
  fft::set_planning({});
}
