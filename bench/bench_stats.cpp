// Statistic kernels against the fastest plan of the transforms they are built on,
// and against the tests' float64 numpy implementation of the same definition,
// measured in the same run (ratios printed at the end; never a pass/fail on time):
//  - scattering on a 256 × 256 slice, J = 6, L = 8, S0+S1+S2, cropped and at full
//    resolution, over one 256 × 256 complex float FFT with the fastest plan: measured
//    (FFTW_MEASURE), on contiguous or on padded rows (264), whichever runs faster
//    (issue 18 target ≤ 200), and over numpy's time for tests/stats/check_scattering.py's
//    reference() (target: spinflip ≥ 80 × faster);
//  - spherical power of a 128 × 128 × 1024 chunk over its fastest r2c FFT (measured,
//    out of place or in place on padded rows, whichever runs faster; target ≤ 1.5), and
//    numpy's reference_spherical() of tests/stats/check_power.py;
//  - the same kernels and FFTs with FFTW_ESTIMATE plans (what the project used before).
// Ratios use CPU time (the machine is shared; wall time there measures the load).
//   bench_stats [--numpy_reps=2] [--no_numpy] [benchmark flags]
#include <benchmark/benchmark.h>

#include <cstdio>
#include <cstring>
#include <map>
#include <random>
#include <string>

#include "core/config.hpp"
#include "fft/fft.hpp"
#include "fft/planning.hpp"
#include "stats/stats.hpp"
#include "bench_support.hpp"

using namespace spinflip;

namespace {

using bench::use_plans;

std::unique_ptr<stats::Kernel> kernel(const std::string& toml) {
  static core::Schema schema = [] {
    core::Schema s;
    stats::declare_keys(s);
    return s;
  }();
  auto config = core::Config::from_string(toml, "bench.toml", schema);
  return std::move(stats::kernels_from(config).front());
}

std::vector<float> noise(std::size_t n) {
  std::mt19937 gen(3);
  std::normal_distribution<float> g;
  std::vector<float> v(n);
  for (auto& x : v) x = std::exp(g(gen));  // lognormal: a non-Gaussian slice
  return v;
}

/// One 256 × 256 inverse c2c, rows `pitch` elements apart (256: contiguous).
void fft_c2c_256(benchmark::State& state, bool measured, std::size_t pitch) {
  use_plans(measured);
  fft::Buffer<fft::cfloat> a(256 * pitch), b(256 * pitch);
  for (std::size_t i = 0; i < a.size(); ++i) a[i] = fft::cfloat(static_cast<float>(i % 7), 0.0f);
  const auto once = [&] {
    if (pitch == 256) fft::c2c_2d(256, 256, a.data(), b.data(), fft::Direction::inverse);
    else fft::c2c_2d_pitched(256, 256, a.data(), pitch, b.data(), pitch, fft::Direction::inverse);
  };
  once();  // plan outside the timing
  for (auto _ : state) {
    once();
    benchmark::DoNotOptimize(b.data());
  }
}

void scattering(benchmark::State& state, bool measured, bool crop) {
  use_plans(measured);
  auto k = kernel(std::string("[stats.scattering]\nscales = 6\norientations = 8\ncrop = ") + (crop ? "true" : "false"));
  const auto x = noise(256 * 256);
  stats::Geometry g{{256, 256}};
  benchmark::DoNotOptimize(k->measure(x.data(), g));  // filters and plans built outside the timing
  for (auto _ : state) benchmark::DoNotOptimize(k->measure(x.data(), g));
}

const std::array<std::size_t, 3> chunk{128, 128, 1024};

/// The chunk's forward r2c: out of place (what the power kernel runs), or in place on padded rows.
void fft_r2c_chunk(benchmark::State& state, bool measured, bool in_place) {
  use_plans(measured);
  const std::size_t h = chunk[0] * chunk[1] * (chunk[2] / 2 + 1);
  fft::Buffer<float> in(in_place ? 2 * h : chunk[0] * chunk[1] * chunk[2]);
  fft::Buffer<fft::cfloat> out(in_place ? 0 : h);
  std::fill_n(in.data(), in.size(), 0.5f);
  auto* o = in_place ? reinterpret_cast<fft::cfloat*>(in.data()) : out.data();
  fft::r2c_3d(chunk, in.data(), o);
  for (auto _ : state) {
    fft::r2c_3d(chunk, in.data(), o);
    benchmark::DoNotOptimize(o);
  }
}

void power_chunk(benchmark::State& state, bool measured) {
  use_plans(measured);
  auto k = kernel("[stats.power]\nbins = 12\n");
  const auto x = noise(chunk[0] * chunk[1] * chunk[2]);
  stats::Geometry g{{chunk[0], chunk[1], chunk[2]}, {1.5, 1.5, 1.5}};
  benchmark::DoNotOptimize(k->measure(x.data(), g));
  for (auto _ : state) benchmark::DoNotOptimize(k->measure(x.data(), g));
}

/// CPU seconds of the tests' numpy reference (bench/numpy_reference.py), or 0 if it fails.
double numpy_seconds(const std::string& args) {
  const std::string cmd = "/usr/bin/python3 " SPINFLIP_SOURCE_DIR "/bench/numpy_reference.py " + args;
  FILE* p = popen(cmd.c_str(), "r");
  if (p == nullptr) return 0;
  double s = 0;
  if (std::fscanf(p, "%lf", &s) != 1) s = 0;
  return pclose(p) == 0 ? s : 0;
}

}  // namespace

int main(int argc, char** argv) {
  int numpy_reps = 2;
  bool numpy = true;
  std::vector<char*> rest{argv[0]};
  for (int i = 1; i < argc; ++i) {
    if (std::strncmp(argv[i], "--numpy_reps=", 13) == 0) numpy_reps = std::atoi(argv[i] + 13);
    else if (std::strcmp(argv[i], "--no_numpy") == 0) numpy = false;
    else rest.push_back(argv[i]);
  }
  int rc = static_cast<int>(rest.size());
  using benchmark::RegisterBenchmark;
  const auto ms = benchmark::kMillisecond;
  // Measured first (every plan measured once, on first use), FFTW_ESTIMATE after.
  for (bool m : {true, false}) {
    const std::string tag = m ? "measured" : "estimate";
    RegisterBenchmark(("fft_c2c_256_contiguous/" + tag).c_str(), fft_c2c_256, m, std::size_t{256})->Unit(ms);
    RegisterBenchmark(("fft_c2c_256_padded/" + tag).c_str(), fft_c2c_256, m, std::size_t{264})->Unit(ms);
    RegisterBenchmark(("scattering_cropped/" + tag).c_str(), scattering, m, true)->Unit(ms);
    if (m) RegisterBenchmark(("scattering_full/" + tag).c_str(), scattering, m, false)->Unit(ms);
    RegisterBenchmark(("fft_r2c_chunk_out_of_place/" + tag).c_str(), fft_r2c_chunk, m, false)->Unit(ms);
    RegisterBenchmark(("fft_r2c_chunk_in_place/" + tag).c_str(), fft_r2c_chunk, m, true)->Unit(ms);
    RegisterBenchmark(("power_chunk/" + tag).c_str(), power_chunk, m)->Unit(ms);
  }
  benchmark::Initialize(&rc, rest.data());
  fft::clear_plan_records();
  bench::SecondsPerIteration reporter(bench::SecondsPerIteration::Clock::cpu);
  benchmark::RunSpecifiedBenchmarks(&reporter);
  std::printf("\nplanning (measured plans, one-off):\n");
  for (const auto& r : fft::plan_records())
    if (r.how == "measured") std::printf("  %8.3f s  %s\n", r.seconds, r.problem.c_str());

  auto& s = reporter.seconds;
  const auto t = [&](const std::string& name) { return s.count(name) ? s[name] : 0.0; };
  const auto faster = [&](const char* a, const char* b, const char* la, const char* lb, const char** which) {
    const double x = t(a), y = t(b);
    *which = (x > 0 && (y == 0 || x <= y)) ? la : lb;
    return (x > 0 && (y == 0 || x <= y)) ? x : y;
  };
  const char* c2c_layout = "";
  const char* r2c_layout = "";
  const double c2c = faster("fft_c2c_256_contiguous/measured", "fft_c2c_256_padded/measured", "contiguous",
                            "padded rows", &c2c_layout);
  const double r2c = faster("fft_r2c_chunk_out_of_place/measured", "fft_r2c_chunk_in_place/measured", "out of place",
                            "in place", &r2c_layout);
  const double sc = t("scattering_cropped/measured"), sf = t("scattering_full/measured");
  const double pw = t("power_chunk/measured");
  const double np_sc = numpy ? numpy_seconds("scattering 256 6 8 " + std::to_string(numpy_reps)) : 0;
  const double np_pw = numpy ? numpy_seconds("power 128 128 1024 " + std::to_string(numpy_reps)) : 0;

  std::printf("\nCPU seconds: c2c 256² fastest (%s, measured) %.3g; scattering cropped %.4g, full %.4g; r2c "
              "128x128x1024 fastest (%s, measured) %.4g; power %.4g; numpy float64: scattering %.4g, power %.4g\n",
              c2c_layout, c2c, sc, sf, r2c_layout, r2c, pw, np_sc, np_pw);
  std::printf("ratios (same run, one thread, CPU time):\n");
  const auto line = [](const char* what, double a, double b, const char* target) {
    if (a > 0 && b > 0) std::printf("  %-66s %8.2f   (%s)\n", what, a / b, target);
  };
  line("scattering 256² J=6 L=8 cropped / fastest c2c FFT 256²", sc, c2c, "target <= 200");
  line("scattering 256² full resolution / fastest c2c FFT 256²", sf, c2c, "reference");
  line("numpy float64 scattering (tests' reference) / spinflip cropped", np_sc, sc, "target >= 80");
  line("spherical power 128x128x1024 / its fastest r2c FFT", pw, r2c, "target <= 1.5");
  line("numpy float64 spherical power (tests' reference) / spinflip", np_pw, pw, "speed-up");
  line("c2c 256² contiguous / padded rows, measured", t("fft_c2c_256_contiguous/measured"),
       t("fft_c2c_256_padded/measured"), "layout");
  line("c2c 256² contiguous / padded rows, FFTW_ESTIMATE", t("fft_c2c_256_contiguous/estimate"),
       t("fft_c2c_256_padded/estimate"), "layout");
  std::printf("before (FFTW_ESTIMATE plans, as the project planned until issue 18):\n");
  line("scattering cropped (estimate) / contiguous c2c 256² (estimate)", t("scattering_cropped/estimate"),
       t("fft_c2c_256_contiguous/estimate"), "the old denominator");
  line("scattering cropped (estimate) / fastest c2c 256² (measured)", t("scattering_cropped/estimate"), c2c,
       "honest");
  line("numpy float64 scattering / spinflip cropped (estimate)", np_sc, t("scattering_cropped/estimate"), "speed-up");
  line("power (estimate) / r2c out of place (estimate)", t("power_chunk/estimate"),
       t("fft_r2c_chunk_out_of_place/estimate"), "the old denominator");
  line("power (estimate) / fastest r2c (measured)", t("power_chunk/estimate"), r2c, "honest");
  line("speed-up of measured plans: scattering cropped", t("scattering_cropped/estimate"), sc, "higher is better");
  line("speed-up of measured plans: spherical power", t("power_chunk/estimate"), pw, "higher is better");
  benchmark::Shutdown();
  return 0;
}
