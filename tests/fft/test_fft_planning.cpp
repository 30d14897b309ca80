// The one planner: measured plans, wisdom, and determinism (DESIGN.md §3, §11).
// Same wisdom → the same plan → identical bytes; different wisdom (another plan of
// the same transform) → the same values to float rounding. Values are checked
// against the DFT definition X_k = Σ x_n e^{-2πi k·n/N} (common practice; FFTW's
// documented unnormalised convention).
#include <gtest/gtest.h>

#include <cmath>
#include <complex>
#include <cstring>
#include <filesystem>
#include <unistd.h>
#include <numbers>
#include <vector>

#include "core/errors.hpp"
#include "fft/fft.hpp"
#include "fft/planning.hpp"

using namespace spinflip;

namespace {

/// Every test starts and ends with no wisdom, no cached plan, estimate planning.
struct FftPlanning : ::testing::Test {
  void SetUp() override { reset(); }
  void TearDown() override { reset(); }
  static void reset() {
    fft::set_planning({});
    fft::set_wisdom_only(false);
    fft::use_wisdom("", "test");
    fft::clear_plan_records();
  }
  static void measure() { fft::set_planning({fft::Rigor::measure, 5.0}); }
};

std::vector<fft::cfloat> signal(std::size_t n) {
  std::vector<fft::cfloat> v(n);
  for (std::size_t i = 0; i < n; ++i)
    v[i] = {static_cast<float>(std::sin(0.37 * double(i)) + 0.1 * double(i % 7)),
            static_cast<float>(std::cos(1.3 * double(i)))};
  return v;
}

/// A 64 × 128 forward c2c and a 16 × 16 × 32 r2c, out of place, on the planner's current state.
std::vector<fft::cfloat> transforms() {
  const std::size_t n0 = 64, n1 = 128;
  const auto x = signal(n0 * n1);
  fft::Buffer<fft::cfloat> in(n0 * n1), out(n0 * n1);
  std::copy(x.begin(), x.end(), in.data());
  fft::c2c_2d(n0, n1, in.data(), out.data(), fft::Direction::forward);
  std::vector<fft::cfloat> all(out.data(), out.data() + out.size());
  const std::array<std::size_t, 3> n{16, 16, 32};
  fft::Buffer<float> r(16 * 16 * 32);
  fft::Buffer<fft::cfloat> c(16 * 16 * 17);
  for (std::size_t i = 0; i < r.size(); ++i) r[i] = x[i].real();
  fft::r2c_3d(n, r.data(), c.data());
  all.insert(all.end(), c.data(), c.data() + c.size());
  return all;
}

bool same_bytes(const std::vector<fft::cfloat>& a, const std::vector<fft::cfloat>& b) {
  return a.size() == b.size() && std::memcmp(a.data(), b.data(), a.size() * sizeof(fft::cfloat)) == 0;
}

double worst_relative(const std::vector<fft::cfloat>& a, const std::vector<fft::cfloat>& b) {
  double worst = 0, scale = 0;
  for (std::size_t i = 0; i < a.size(); ++i) {
    worst = std::max(worst, double(std::abs(a[i] - b[i])));
    scale = std::max(scale, double(std::abs(a[i])));
  }
  return worst / scale;
}

}  // namespace

TEST_F(FftPlanning, MeasuredPlansLeaveTheCallersArraysAloneAndMatchTheDefinition) {
  measure();
  const std::size_t n0 = 8, n1 = 12;
  const auto x = signal(n0 * n1);
  fft::Buffer<fft::cfloat> in(n0 * n1), out(n0 * n1);
  std::copy(x.begin(), x.end(), in.data());
  fft::c2c_2d(n0, n1, in.data(), out.data(), fft::Direction::forward);
  ASSERT_FALSE(fft::plan_records().empty());
  EXPECT_EQ(fft::plan_records().back().how, "measured");
  EXPECT_EQ(std::memcmp(in.data(), x.data(), x.size() * sizeof(fft::cfloat)), 0) << "planning touched the input";
  for (std::size_t a = 0; a < n0; ++a)
    for (std::size_t b = 0; b < n1; ++b) {
      std::complex<double> s = 0;
      for (std::size_t i = 0; i < n0; ++i)
        for (std::size_t j = 0; j < n1; ++j)
          s += std::complex<double>(x[i * n1 + j]) *
               std::polar(1.0, -2 * std::numbers::pi * (double(a * i) / double(n0) + double(b * j) / double(n1)));
      // float rounding: |X| ≲ 10², a few ulps per butterfly stage
      EXPECT_LT(std::abs(std::complex<double>(out[a * n1 + b]) - s), 1e-4 * double(n0 * n1)) << a << "," << b;
    }
}

TEST_F(FftPlanning, SameWisdomGivesIdenticalBytes) {
  measure();
  const auto first = transforms();
  const std::string wisdom = fft::wisdom_text();
  ASSERT_NE(wisdom.find("fftwf_wisdom"), std::string::npos);
  // A new process would start here: the wisdom alone, no cached plan.
  fft::use_wisdom(wisdom, "test");
  fft::set_wisdom_only(true);
  fft::clear_plan_records();
  const auto again = transforms();
  for (const auto& r : fft::plan_records()) EXPECT_EQ(r.how, "from wisdom") << r.problem;
  EXPECT_TRUE(same_bytes(first, again));
}

TEST_F(FftPlanning, DifferentWisdomAgreesToFloatRounding) {
  const auto estimated = transforms();  // FFTW_ESTIMATE: one plan
  fft::use_wisdom("", "test");
  fft::set_planning({fft::Rigor::patient, 5.0});  // another, usually different, plan
  const auto patient = transforms();
  // float rounding of an N = 8192-point transform: ~ε log2 N relative to the largest mode
  EXPECT_LT(worst_relative(estimated, patient), 2e-6);
}

TEST_F(FftPlanning, TransformsMissingFromTheWisdomArePlannedAlikeEverywhere) {
  measure();
  fft::set_wisdom_only(true);
  const auto wisdom_only = transforms();
  for (const auto& r : fft::plan_records()) EXPECT_EQ(r.how, "estimate (not in wisdom)") << r.problem;
  fft::set_wisdom_only(false);
  fft::set_planning({});
  fft::use_wisdom("", "test");
  EXPECT_TRUE(same_bytes(wisdom_only, transforms())) << "a miss must give the timing-free FFTW_ESTIMATE plan";
}

TEST_F(FftPlanning, PlanHandlesOutliveForgottenPlansAndCheckTheirArrays) {
  measure();
  const std::size_t n = 24, count = 5;
  const auto x = signal(n * count);
  fft::Buffer<fft::cfloat> a(n * count), b(n * count), c(n * count);
  std::copy(x.begin(), x.end(), a.data());
  const fft::Plan p = fft::plan_c2c_1d_many(n, count, a.data(), 1, n, b.data(), 1, n, fft::Direction::forward);
  fft::forget_plans();  // the planner lets go; the handle keeps the plan
  p.c2c(a.data(), b.data());
  fft::c2c_1d_batch(n, count, a.data(), 1, n, c.data(), 1, n, fft::Direction::forward);
  EXPECT_LT(worst_relative(std::vector<fft::cfloat>(c.data(), c.data() + c.size()),
                           std::vector<fft::cfloat>(b.data(), b.data() + b.size())),
            2e-6);  // two plans of one transform: float rounding
  EXPECT_THROW(p.c2c(a.data(), a.data()), InternalError);      // planned out of place
  EXPECT_THROW(p.c2c(a.data() + 1, b.data()), InternalError);  // another alignment (8 bytes off)
}

TEST_F(FftPlanning, BatchedTwoDimensionalPlansMatchOneByOne) {
  measure();
  // Two 6 × 8 r2c transforms on padded rows (10 reals) in one buffer, as the instrument lays them out.
  const std::size_t n0 = 6, n1 = 8, h = n1 / 2 + 1, pitch = 2 * h, plane = n0 * pitch;
  fft::Buffer<float> buf(2 * plane);
  for (std::size_t i = 0; i < buf.size(); ++i) buf[i] = static_cast<float>(std::sin(0.3 * double(i)));
  std::vector<float> orig(buf.data(), buf.data() + buf.size());
  auto* c = reinterpret_cast<fft::cfloat*>(buf.data());
  fft::plan_r2c_2d_many(n0, n1, 2, buf.data(), pitch, plane, c, h, plane / 2).r2c(buf.data(), c);
  for (std::size_t t = 0; t < 2; ++t) {
    fft::Buffer<float> one(n0 * n1);
    fft::Buffer<fft::cfloat> ref(n0 * h);
    for (std::size_t i = 0; i < n0; ++i)
      for (std::size_t j = 0; j < n1; ++j) one[i * n1 + j] = orig[t * plane + i * pitch + j];
    fft::r2c_2d(n0, n1, one.data(), ref.data());
    for (std::size_t i = 0; i < n0; ++i)
      for (std::size_t j = 0; j < h; ++j)
        EXPECT_LT(std::abs(c[t * plane / 2 + i * h + j] - ref[i * h + j]), 1e-4f);  // float rounding, |X| ≲ 50
  }
  fft::plan_c2r_2d_many(n0, n1, 2, c, h, plane / 2, buf.data(), pitch, plane).c2r(c, buf.data());
  for (std::size_t t = 0; t < 2; ++t)
    for (std::size_t i = 0; i < n0; ++i)
      for (std::size_t j = 0; j < n1; ++j)  // round trip multiplies by N = 48
        EXPECT_NEAR(buf[t * plane + i * pitch + j] / 48.0f, orig[t * plane + i * pitch + j], 1e-5f);
}

TEST_F(FftPlanning, NotWisdomIsRefusedWithItsOrigin) {
  try {
    fft::use_wisdom("(this is not wisdom)", "/some/cache/fftw-wisdom");
    FAIL() << "no error";
  } catch (const InputError& e) {
    EXPECT_NE(std::string(e.what()).find("/some/cache/fftw-wisdom"), std::string::npos);
  }
}

TEST_F(FftPlanning, WisdomFilesRoundTrip) {
  measure();
  (void)transforms();
  const auto path = std::filesystem::temp_directory_path() / ("spinflip-wisdom-test-" + std::to_string(::getpid()));
  EXPECT_EQ(fft::read_wisdom_file(path), "");  // missing: no wisdom, not an error
  fft::write_wisdom_file(path, fft::wisdom_text());
  EXPECT_EQ(fft::read_wisdom_file(path), fft::wisdom_text());
  std::filesystem::remove(path);
}
