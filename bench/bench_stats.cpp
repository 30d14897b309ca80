// Statistic kernels against the transforms they are built on, measured in the
// same run (ratios printed at the end; never a pass/fail on time):
//  - scattering on a 256 × 256 slice, J = 6, L = 8, S0+S1+S2, cropped and at
//    full resolution, over one 256 × 256 complex float FFT planned as the project
//    plans its transforms (fft::c2c_2d, FFTW_ESTIMATE, contiguous; issue target ≤ 160),
//    and, for information, over the same FFT on padded rows;
//  - spherical power of a 128 × 128 × 1024 chunk over its forward r2c FFT (≤ 1.5).
//   bench_stats [--benchmark_filter=...] [--benchmark_min_time=...]
#include <benchmark/benchmark.h>

#include <cstdio>
#include <map>
#include <random>
#include <string>

#include "core/config.hpp"
#include "fft/fft.hpp"
#include "stats/stats.hpp"

using namespace spinflip;

namespace {

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

void fft_c2c_256(benchmark::State& state) {
  fft::Buffer<fft::cfloat> a(256 * 256), b(256 * 256);
  for (std::size_t i = 0; i < a.size(); ++i) a[i] = fft::cfloat(static_cast<float>(i % 7), 0.0f);
  fft::c2c_2d(256, 256, a.data(), b.data(), fft::Direction::inverse);  // plan outside the timing
  for (auto _ : state) {
    fft::c2c_2d(256, 256, a.data(), b.data(), fft::Direction::inverse);
    benchmark::DoNotOptimize(b.data());
  }
}
BENCHMARK(fft_c2c_256)->Unit(benchmark::kMillisecond);

// The same transform on rows padded to 264 elements (what the scattering kernel's inverses
// use): a contiguous power-of-two row under FFTW_ESTIMATE is much slower (cache sets). Not the
// reference of the target, printed as a second ratio to show how much of it is the layout.
void fft_c2c_256_padded(benchmark::State& state) {
  constexpr std::size_t pitch = 256 + 8;
  fft::Buffer<fft::cfloat> a(256 * pitch), b(256 * pitch);
  for (std::size_t i = 0; i < a.size(); ++i) a[i] = fft::cfloat(static_cast<float>(i % 7), 0.0f);
  fft::c2c_2d_pitched(256, 256, a.data(), pitch, b.data(), pitch, fft::Direction::inverse);
  for (auto _ : state) {
    fft::c2c_2d_pitched(256, 256, a.data(), pitch, b.data(), pitch, fft::Direction::inverse);
    benchmark::DoNotOptimize(b.data());
  }
}
BENCHMARK(fft_c2c_256_padded)->Unit(benchmark::kMillisecond);

void scattering(benchmark::State& state, bool crop) {
  auto k = kernel(std::string("[stats.scattering]\nscales = 6\norientations = 8\ncrop = ") + (crop ? "true" : "false"));
  const auto x = noise(256 * 256);
  stats::Geometry g{{256, 256}};
  benchmark::DoNotOptimize(k->measure(x.data(), g));  // filters and plans built outside the timing
  for (auto _ : state) benchmark::DoNotOptimize(k->measure(x.data(), g));
}
BENCHMARK_CAPTURE(scattering, cropped, true)->Unit(benchmark::kMillisecond);
BENCHMARK_CAPTURE(scattering, full, false)->Unit(benchmark::kMillisecond);

const std::array<std::size_t, 3> chunk{128, 128, 1024};

void fft_r2c_chunk(benchmark::State& state) {
  const auto x = noise(chunk[0] * chunk[1] * chunk[2]);
  fft::Buffer<fft::cfloat> out(chunk[0] * chunk[1] * (chunk[2] / 2 + 1));
  fft::r2c_3d(chunk, x.data(), out.data());
  for (auto _ : state) {
    fft::r2c_3d(chunk, x.data(), out.data());
    benchmark::DoNotOptimize(out.data());
  }
}
BENCHMARK(fft_r2c_chunk)->Unit(benchmark::kMillisecond);

void power_chunk(benchmark::State& state) {
  auto k = kernel("[stats.power]\nbins = 12\n");
  const auto x = noise(chunk[0] * chunk[1] * chunk[2]);
  stats::Geometry g{{chunk[0], chunk[1], chunk[2]}, {1.5, 1.5, 1.5}};
  benchmark::DoNotOptimize(k->measure(x.data(), g));
  for (auto _ : state) benchmark::DoNotOptimize(k->measure(x.data(), g));
}
BENCHMARK(power_chunk)->Unit(benchmark::kMillisecond);

/// Keeps each benchmark's mean wall time per iteration for the ratio lines.
class Collect : public benchmark::ConsoleReporter {
 public:
  std::map<std::string, double> seconds, cpu_seconds;
  void ReportRuns(const std::vector<Run>& runs) override {
    for (const auto& r : runs)
      if (r.iterations > 0) {
        seconds[r.benchmark_name()] = r.real_accumulated_time / static_cast<double>(r.iterations);
        cpu_seconds[r.benchmark_name()] = r.cpu_accumulated_time / static_cast<double>(r.iterations);
      }
    ConsoleReporter::ReportRuns(runs);
  }
};

}  // namespace

int main(int argc, char** argv) {
  benchmark::Initialize(&argc, argv);
  Collect reporter;
  benchmark::RunSpecifiedBenchmarks(&reporter);
  auto& s = reporter.seconds;
  auto& c = reporter.cpu_seconds;
  // CPU-time ratios too: on a shared machine wall time includes waiting for a core.
  auto ratio = [&](const char* what, const char* a, const char* b, const char* target) {
    if (s.count(a) && s.count(b))
      std::printf("%-52s wall %8.1f  cpu %8.1f   (%s)\n", what, s[a] / s[b], c[a] / c[b], target);
  };
  std::printf("\nratios (same run, one thread):\n");
  ratio("scattering 256² J=6 L=8 (cropped) / c2c FFT 256²", "scattering/cropped", "fft_c2c_256", "target <= 160");
  ratio("scattering 256² full resolution / c2c FFT 256²", "scattering/full", "fft_c2c_256", "reference");
  ratio("cropped / padded-row c2c FFT 256² (not the target)", "scattering/cropped", "fft_c2c_256_padded", "layout");
  ratio("full resolution / padded-row c2c FFT 256²", "scattering/full", "fft_c2c_256_padded", "layout");
  ratio("contiguous c2c FFT / padded-row c2c FFT 256²", "fft_c2c_256", "fft_c2c_256_padded", "layout");
  ratio("speed-up of cropping: full / cropped", "scattering/full", "scattering/cropped", "higher is better");
  ratio("spherical power 128x128x1024 / its r2c FFT", "power_chunk", "fft_r2c_chunk", "target <= 1.5");
  benchmark::Shutdown();
  return 0;
}
