// Serial transforms against the DFT definition X_k = Σ x_n e^{-2πi k·n/N}
// (common practice; FFTW's documented unnormalised convention).
#include <gtest/gtest.h>

#include <cmath>
#include <complex>
#include <numbers>
#include <random>
#include <vector>

#include "fft/fft.hpp"

using namespace spinflip;
using cd = std::complex<double>;

namespace {
std::vector<cd> naive_dft_2d(const std::vector<cd>& x, std::size_t n0, std::size_t n1, int sign) {
  std::vector<cd> out(n0 * n1);
  const double two_pi = 2 * std::numbers::pi;
  for (std::size_t a = 0; a < n0; ++a)
    for (std::size_t b = 0; b < n1; ++b) {
      cd s = 0;
      for (std::size_t i = 0; i < n0; ++i)
        for (std::size_t j = 0; j < n1; ++j) {
          const double ph = sign * two_pi * (double(a * i) / double(n0) + double(b * j) / double(n1));
          s += x[i * n1 + j] * std::polar(1.0, ph);
        }
      out[a * n1 + b] = s;
    }
  return out;
}
}  // namespace

TEST(Fft, C2c2dMatchesDefinition) {
  const std::size_t n0 = 6, n1 = 5;
  std::mt19937 gen(3);
  std::normal_distribution<double> g;
  fft::Buffer<fft::cdouble> in(n0 * n1), out(n0 * n1);
  std::vector<cd> x(n0 * n1);
  for (std::size_t i = 0; i < x.size(); ++i) x[i] = in[i] = {g(gen), g(gen)};
  fft::c2c_2d(n0, n1, in.data(), out.data(), fft::Direction::forward);
  const auto ref = naive_dft_2d(x, n0, n1, -1);
  for (std::size_t i = 0; i < x.size(); ++i) EXPECT_LT(std::abs(out[i] - ref[i]), 1e-10);
  fft::c2c_2d(n0, n1, out.data(), in.data(), fft::Direction::inverse);
  for (std::size_t i = 0; i < x.size(); ++i) EXPECT_LT(std::abs(in[i] / double(n0 * n1) - x[i]), 1e-12);
}

TEST(Fft, R2c2dIsHalfOfTheFullTransformAndRoundTrips) {
  const std::size_t n0 = 8, n1 = 7, h = n1 / 2 + 1;
  std::mt19937 gen(5);
  std::normal_distribution<float> g;
  fft::Buffer<float> in(n0 * n1), back(n0 * n1);
  fft::Buffer<fft::cfloat> out(n0 * h);
  std::vector<cd> x(n0 * n1);
  for (std::size_t i = 0; i < x.size(); ++i) x[i] = in[i] = g(gen);
  fft::r2c_2d(n0, n1, in.data(), out.data());
  const auto ref = naive_dft_2d(x, n0, n1, -1);
  for (std::size_t a = 0; a < n0; ++a)
    for (std::size_t b = 0; b < h; ++b) EXPECT_LT(std::abs(cd(out[a * h + b]) - ref[a * n1 + b]), 1e-4);
  fft::c2r_2d(n0, n1, out.data(), back.data());
  for (std::size_t i = 0; i < x.size(); ++i) EXPECT_NEAR(back[i] / float(n0 * n1), in[i], 1e-5);
}

TEST(Fft, Parseval3d) {
  // Parseval: Σ|x|² = (1/N) Σ_k |X_k|² over the full grid; the r2c half grid
  // counts the planes k2 = 1 … (n2-1)/2 twice (common practice).
  const std::array<std::size_t, 3> n{6, 4, 10};
  const std::size_t h = n[2] / 2 + 1, N = n[0] * n[1] * n[2];
  std::mt19937 gen(9);
  std::normal_distribution<double> g;
  fft::Buffer<double> in(N);
  fft::Buffer<fft::cdouble> out(n[0] * n[1] * h);
  double sum_x = 0;
  for (std::size_t i = 0; i < N; ++i) {
    in[i] = g(gen);
    sum_x += in[i] * in[i];
  }
  fft::r2c_3d(n, in.data(), out.data());
  double sum_k = 0;
  for (std::size_t q = 0; q < n[0] * n[1] * h; ++q) {
    const std::size_t k2 = q % h;
    const double w = (k2 == 0 || (n[2] % 2 == 0 && k2 == n[2] / 2)) ? 1.0 : 2.0;
    sum_k += w * std::norm(out[q]);
  }
  EXPECT_NEAR(sum_k / double(N), sum_x, 1e-9 * sum_x);
}

TEST(Fft, InPlaceAndOutOfPlaceAgree) {
  const std::array<std::size_t, 3> n{4, 6, 8};
  const std::size_t N = n[0] * n[1] * n[2];
  fft::Buffer<fft::cfloat> a(N), b(N), c(N);
  for (std::size_t i = 0; i < N; ++i) a[i] = b[i] = {float(std::sin(0.3 * double(i))), float(std::cos(0.7 * double(i)))};
  fft::c2c_3d(n, a.data(), c.data(), fft::Direction::forward);
  fft::c2c_3d(n, b.data(), b.data(), fft::Direction::forward);
  for (std::size_t i = 0; i < N; ++i) EXPECT_LT(std::abs(cd(b[i]) - cd(c[i])), 1e-4);
}

TEST(Fft, ThreadsCanBeSet) {
  EXPECT_THROW(fft::set_threads(0), std::exception);
  fft::set_threads(2);
  const std::size_t n0 = 16, n1 = 16;
  fft::Buffer<fft::cdouble> in(n0 * n1), out(n0 * n1);
  for (std::size_t i = 0; i < n0 * n1; ++i) in[i] = double(i % 7);
  fft::c2c_2d(n0, n1, in.data(), out.data(), fft::Direction::forward);
  double s = 0;
  for (std::size_t i = 0; i < n0 * n1; ++i) s += in[i].real();
  EXPECT_NEAR(out[0].real(), s, 1e-9);
  fft::set_threads(1);
}

// Pitched rows: the transform of the n0 × n1 values equals the DFT definition; the
// padding between rows is neither read nor written.
TEST(Fft, C2c2dPitchedMatchesDefinitionAndLeavesPaddingAlone) {
  const std::size_t n0 = 6, n1 = 8, pin = 11, pout = 10;
  std::mt19937 gen(4);
  std::normal_distribution<float> g;
  fft::Buffer<fft::cfloat> in(n0 * pin), out(n0 * pout);
  std::vector<cd> x(n0 * n1);
  for (std::size_t i = 0; i < n0 * pin; ++i) in[i] = {1e30f, 1e30f};  // padding: would spoil any output it reached
  for (std::size_t a = 0; a < n0; ++a)
    for (std::size_t b = 0; b < n1; ++b) x[a * n1 + b] = in[a * pin + b] = {g(gen), g(gen)};
  for (std::size_t i = 0; i < n0 * pout; ++i) out[i] = {-7.0f, 3.0f};
  for (auto d : {fft::Direction::forward, fft::Direction::inverse}) {
    fft::c2c_2d_pitched(n0, n1, in.data(), pin, out.data(), pout, d);
    const auto ref = naive_dft_2d(x, n0, n1, d == fft::Direction::forward ? -1 : 1);
    for (std::size_t a = 0; a < n0; ++a) {
      for (std::size_t b = 0; b < n1; ++b) EXPECT_LT(std::abs(cd(out[a * pout + b]) - ref[a * n1 + b]), 1e-4);
      for (std::size_t b = n1; b < pout; ++b) EXPECT_EQ(out[a * pout + b], fft::cfloat(-7.0f, 3.0f));
    }
  }
  // in place with the same pitch
  fft::Buffer<fft::cfloat> io(n0 * pin);
  for (std::size_t i = 0; i < n0 * pin; ++i) io[i] = in[i];
  fft::c2c_2d_pitched(n0, n1, io.data(), pin, io.data(), pin, fft::Direction::forward);
  const auto ref = naive_dft_2d(x, n0, n1, -1);
  for (std::size_t a = 0; a < n0; ++a)
    for (std::size_t b = 0; b < n1; ++b) EXPECT_LT(std::abs(cd(io[a * pin + b]) - ref[a * n1 + b]), 1e-4);
  EXPECT_THROW(fft::c2c_2d_pitched(n0, n1, in.data(), n1 - 1, out.data(), pout, fft::Direction::forward),
               std::exception);
}

// A strided batch: the columns of a padded 2D array, each against the 1D DFT definition.
TEST(Fft, C2c1dBatchTransformsColumnsAndRows) {
  const std::size_t rows = 7, cols = 5, pitch = 9;
  std::mt19937 gen(6);
  std::normal_distribution<float> g;
  fft::Buffer<fft::cfloat> in(rows * pitch), out(rows * pitch);
  for (std::size_t i = 0; i < rows * pitch; ++i) in[i] = {g(gen), g(gen)};
  auto dft1 = [](const std::vector<cd>& v, int sign) {
    std::vector<cd> r(v.size());
    for (std::size_t k = 0; k < v.size(); ++k)
      for (std::size_t t = 0; t < v.size(); ++t)
        r[k] += v[t] * std::polar(1.0, sign * 2 * std::numbers::pi * double(k * t) / double(v.size()));
    return r;
  };
  // columns: length rows, stride pitch, next transform 1 element on
  fft::c2c_1d_batch(rows, cols, in.data(), pitch, 1, out.data(), pitch, 1, fft::Direction::inverse);
  for (std::size_t c = 0; c < cols; ++c) {
    std::vector<cd> v(rows);
    for (std::size_t r = 0; r < rows; ++r) v[r] = in[r * pitch + c];
    const auto ref = dft1(v, +1);
    for (std::size_t r = 0; r < rows; ++r) EXPECT_LT(std::abs(cd(out[r * pitch + c]) - ref[r]), 1e-4);
  }
  // rows 2..4 only, in place: the other rows stay as they were
  fft::Buffer<fft::cfloat> io(rows * pitch);
  for (std::size_t i = 0; i < rows * pitch; ++i) io[i] = in[i];
  fft::c2c_1d_batch(cols, 3, io.data() + 2 * pitch, 1, pitch, io.data() + 2 * pitch, 1, pitch, fft::Direction::forward);
  for (std::size_t r = 0; r < rows; ++r) {
    std::vector<cd> v(cols);
    for (std::size_t c = 0; c < cols; ++c) v[c] = in[r * pitch + c];
    const auto ref = r >= 2 && r < 5 ? dft1(v, -1) : v;
    for (std::size_t c = 0; c < cols; ++c) EXPECT_LT(std::abs(cd(io[r * pitch + c]) - ref[c]), 1e-4);
  }
}
