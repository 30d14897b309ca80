// Unit checks of the kernel interface: registry, coefficient counts against
// axes, dimensionality errors, full-grid mode counting on the half grid, the
// .npy header parser (format from numpy's format.py documentation), and
// thread safety (concurrent measure() equals serial, bit for bit).
#include <gtest/gtest.h>

#include <cmath>
#include <random>
#include <thread>

#include "core/errors.hpp"
#include "stats/npy.hpp"
#include "stats/stats.hpp"

using namespace spinflip;

namespace {

const core::Schema& schema() {
  static core::Schema s = [] {
    core::Schema x;
    stats::declare_keys(x);
    return x;
  }();
  return s;
}

std::vector<std::unique_ptr<stats::Kernel>> kernels(const std::string& toml) {
  return stats::kernels_from(core::Config::from_string(toml, "test.toml", schema()));
}

const char* all_tables = R"([stats.power]
bins = 5
k_min_mpc = 0.2
k_max_mpc = 3.0
[stats.slice_power]
bins = 4
[stats.cylindrical]
kperp_bins = 3
kpar_bins = 2
[stats.scattering]
scales = 3
orientations = 4
reduce = "rotation"
[stats.scattering3d]
transverse_scales = 2
los_scales = 2
[stats.bispectrum]
k1_mpc = [0.8]
k2_mpc = [0.8]
angle_deg = [120]
[stats.slice_bispectrum]
k1_mpc = [0.8, 1.0]
k2_mpc = [0.8]
angle_deg = [120]
quantity = "normalised"
[stats.moments]
histogram_edges = [-1, 0, 1]
[stats.chunk_moments]
)";

std::vector<float> random_field(std::size_t n, unsigned seed) {
  std::mt19937 gen(seed);
  std::normal_distribution<float> g;
  std::vector<float> v(n);
  for (auto& x : v) x = g(gen) + 0.3f * g(gen) * g(gen);
  return v;
}

std::size_t axis_length(const stats::Axis& a) {
  return std::visit([](const auto& v) { return v.size(); }, a.values);
}

}  // namespace

TEST(StatsRegistry, OneKernelPerTableInDeclarationOrder) {
  auto ks = kernels(all_tables);
  std::vector<std::string> names;
  for (auto& k : ks) names.push_back(k->name());
  EXPECT_EQ(names, (std::vector<std::string>{"power", "slice_power", "cylindrical", "scattering", "scattering3d", "bispectrum",
                                             "slice_bispectrum", "moments", "chunk_moments"}));
  EXPECT_TRUE(kernels("# nothing\n").empty());
}

TEST(StatsRegistry, CoefficientCountMatchesAxesAndMeasure) {
  auto ks = kernels(all_tables);
  const stats::Geometry slice{{16, 20}, {1.0, 1.0, 1.0}}, chunk{{8, 10, 12}, {2.0, 2.0, 2.0}};
  for (auto& k : ks) {
    const auto& g = k->unit_kind() == stats::UnitKind::slice ? slice : chunk;
    const auto x = random_field(g.n_cells(), 1);
    const auto v = k->measure(x.data(), g);
    EXPECT_EQ(v.size(), k->n_coeff(g)) << k->name();
    for (const auto& a : k->axes(g)) EXPECT_EQ(axis_length(a), k->n_coeff(g)) << k->name() << " axis " << a.name;
  }
}

TEST(StatsRegistry, WrongDimensionalityIsAnInputError) {
  auto ks = kernels(all_tables);
  const stats::Geometry slice{{16, 16}}, chunk{{8, 8, 8}};
  for (auto& k : ks) {
    const auto& wrong = k->unit_kind() == stats::UnitKind::slice ? chunk : slice;
    EXPECT_THROW(k->check(wrong), InputError) << k->name();
  }
}

TEST(StatsRegistry, ScalesNeedEnoughPixels) {
  auto ks = kernels("[stats.scattering]\nscales = 5\n");
  EXPECT_THROW(ks[0]->check(stats::Geometry{{31, 64}}), InputError);
  EXPECT_NO_THROW(ks[0]->check(stats::Geometry{{32, 64}}));
}

// Counting on the r2c half grid with mirror weights must reproduce the full
// grid: one bin over every k != 0 holds N - 1 modes, for odd and even last axes.
TEST(StatsPower, HalfGridCountsEveryFullGridModeOnce) {
  auto ks = kernels("[stats.power]\nbins = 1\nk_min_mpc = 1e-9\nk_max_mpc = 1000\n"
                    "[stats.slice_power]\nbins = 1\nk_min_mpc = 1e-9\nk_max_mpc = 1000\n");
  for (auto shape : {std::vector<std::size_t>{6, 5, 7}, {4, 6, 8}, {3, 3, 2}}) {
    const stats::Geometry g{shape, {1.0, 1.0, 1.0}};
    const auto axes = ks[0]->axes(g);
    for (const auto& a : axes)
      if (a.name == "n_modes") {
        EXPECT_EQ(std::get<std::vector<std::int64_t>>(a.values)[0], g.n_cells() - 1);
      }
  }
  for (auto shape : {std::vector<std::size_t>{9, 7}, {8, 10}}) {
    const stats::Geometry g{shape, {1.0, 1.0, 1.0}};
    for (const auto& a : ks[1]->axes(g))
      if (a.name == "n_modes") {
        EXPECT_EQ(std::get<std::vector<std::int64_t>>(a.values)[0], g.n_cells() - 1);
      }
  }
}

// Kernels hold no mutable state beyond their locked caches: four threads measuring
// different slices give exactly the serial values.
TEST(StatsThreads, ConcurrentMeasureEqualsSerial) {
  auto ks = kernels(all_tables);
  const stats::Geometry slice{{32, 24}, {1.5, 1.5, 1.5}};
  std::vector<std::vector<float>> fields;
  for (unsigned s = 0; s < 8; ++s) fields.push_back(random_field(slice.n_cells(), 10 + s));
  for (auto& k : ks) {
    if (k->unit_kind() != stats::UnitKind::slice) continue;
    std::vector<std::vector<double>> serial, parallel(fields.size());
    for (auto& f : fields) serial.push_back(k->measure(f.data(), slice));
    auto fresh = kernels(all_tables);  // empty caches, so threads also race on building them
    const stats::Kernel* kk = nullptr;
    for (auto& f : fresh)
      if (f->name() == k->name()) kk = f.get();
    std::vector<std::thread> pool;
    for (unsigned t = 0; t < 4; ++t)
      pool.emplace_back([&, t] {
        for (std::size_t i = t; i < fields.size(); i += 4) parallel[i] = kk->measure(fields[i].data(), slice);
      });
    for (auto& th : pool) th.join();
    for (std::size_t i = 0; i < fields.size(); ++i)
      for (std::size_t c = 0; c < serial[i].size(); ++c)
        if (!std::isnan(serial[i][c])) {
          EXPECT_EQ(serial[i][c], parallel[i][c]) << k->name() << " slice " << i;
        }
  }
}

// Chunk kernels measured from several threads at once, on a fresh kernel whose filter cache the
// threads race to build, give the serial results bit for bit (cylindrical scattering: thread-local
// scratch, filters per shape behind the cache's mutex).
TEST(StatsThreads, ConcurrentChunkMeasureEqualsSerial) {
  const char* toml = "[stats.scattering3d]\ntransverse_scales = 3\nlos_scales = 2\n[stats.power]\n";
  const stats::Geometry chunk{{24, 20, 16}, {2.0, 2.0, 2.0}};
  std::vector<std::vector<float>> fields;
  for (unsigned s = 0; s < 6; ++s) fields.push_back(random_field(chunk.n_cells(), 40 + s));
  auto serial_kernels = kernels(toml), fresh = kernels(toml);
  for (std::size_t k = 0; k < fresh.size(); ++k) {
    std::vector<std::vector<double>> serial, parallel(fields.size());
    for (auto& f : fields) serial.push_back(serial_kernels[k]->measure(f.data(), chunk));
    std::vector<std::thread> pool;
    for (unsigned t = 0; t < 3; ++t)
      pool.emplace_back([&, t] {
        for (std::size_t i = t; i < fields.size(); i += 3) parallel[i] = fresh[k]->measure(fields[i].data(), chunk);
      });
    for (auto& th : pool) th.join();
    for (std::size_t i = 0; i < fields.size(); ++i)
      for (std::size_t c = 0; c < serial[i].size(); ++c)
        if (!std::isnan(serial[i][c])) {
          EXPECT_EQ(serial[i][c], parallel[i][c]) << fresh[k]->name() << " chunk " << i;
        }
  }
}

TEST(StatsNpy, ParsesHeaderDictionaries) {
  std::string descr;
  bool fortran = true;
  std::vector<std::size_t> shape;
  stats::parse_npy_header("{'descr': '<f4', 'fortran_order': False, 'shape': (3, 4), }", "t", descr, fortran, shape);
  EXPECT_EQ(descr, "<f4");
  EXPECT_FALSE(fortran);
  EXPECT_EQ(shape, (std::vector<std::size_t>{3, 4}));
  stats::parse_npy_header("{'descr': '>f8', 'fortran_order': True, 'shape': (7,), }", "t", descr, fortran, shape);
  EXPECT_EQ(descr, ">f8");
  EXPECT_TRUE(fortran);
  EXPECT_EQ(shape, (std::vector<std::size_t>{7}));
  EXPECT_THROW(stats::parse_npy_header("{'descr': '<f4', 'shape': (3, 4)}", "t", descr, fortran, shape), InputError);
  EXPECT_THROW(stats::parse_npy_header("{'descr': '<f4', 'fortran_order': False, 'shape': (3, x)}", "t", descr,
                                       fortran, shape),
               InputError);
}

TEST(StatsFinite, NanAndInfAreInputErrors) {
  std::vector<float> v(10, 1.0f);
  EXPECT_NO_THROW(stats::check_finite(v.data(), v.size(), "x"));
  v[4] = std::nanf("");
  EXPECT_THROW(stats::check_finite(v.data(), v.size(), "x"), InputError);
  v[4] = INFINITY;
  EXPECT_THROW(stats::check_finite(v.data(), v.size(), "x"), InputError);
}

// The benchmarked configuration (bench/bench_stats.cpp: 256 × 256 lognormal slice from
// mt19937 seed 3, J = 6, L = 8, all of S0, S1, S2): every cropped coefficient within the
// contract's |c − c_ref| ≤ 1e−4 |c_ref| + 1e−6 max|c_ref| of the full-resolution path
// (DESIGN.md §6), which itself matches numpy to < 1e−6 relative (check_scattering.py).
// Measuring twice on one thread gives the same values bit for bit (reused scratch).
TEST(StatsScattering, CroppedMatchesFullResolutionOnTheBenchmarkSlice) {
  auto cropped = kernels("[stats.scattering]\nscales = 6\norientations = 8\ncrop = true\n");
  auto full = kernels("[stats.scattering]\nscales = 6\norientations = 8\ncrop = false\n");
  std::mt19937 gen(3);
  std::normal_distribution<float> g;
  std::vector<float> x(256 * 256);
  for (auto& v : x) v = std::exp(g(gen));
  const stats::Geometry slice{{256, 256}};
  const auto c = cropped[0]->measure(x.data(), slice);
  const auto ref = full[0]->measure(x.data(), slice);
  ASSERT_EQ(c.size(), ref.size());
  ASSERT_EQ(c.size(), 1u + 6 * 8 + 15 * 64);
  double scale = 0.0;
  for (double v : ref) scale = std::max(scale, std::abs(v));
  for (std::size_t i = 0; i < c.size(); ++i)
    EXPECT_LE(std::abs(c[i] - ref[i]), 1e-4 * std::abs(ref[i]) + 1e-6 * scale) << "coefficient " << i;
  EXPECT_EQ(cropped[0]->measure(x.data(), slice), c);
}
