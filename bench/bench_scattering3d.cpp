// Cylindrical wavelet scattering of a chunk ([stats.scattering3d], issue 22) against the fastest
// forward FFT of the same chunk, measured in the same run (ratios printed at the end; never a
// pass/fail on time): defaults J = 4, M = 3 (S0 + S1 + S2, 61 coefficients) on a 128 × 128 × 64
// lognormal chunk, cropped and at full resolution (crop = false), over one r2c FFT of the chunk
// planned with FFTW_MEASURE (issue target ≤ 40). The speed-up over the numpy float64 reference
// (tests/stats/scattering3d_reference.py) is measured by bench/scattering3d_numpy.py, which times
// `spinflip measure` and the numpy implementation on the same chunk in one run.
//   bench_scattering3d [--benchmark_filter=...] [--benchmark_min_time=...]
#include <benchmark/benchmark.h>
#include <fftw3.h>

#include <cmath>
#include <cstdio>
#include <map>
#include <random>
#include <string>

#include "core/config.hpp"
#include "fft/fft.hpp"
#include "stats/stats.hpp"

using namespace spinflip;

namespace {

constexpr int n1 = 128, n2 = 128, n3 = 64;

std::unique_ptr<stats::Kernel> kernel(bool crop) {
  static core::Schema schema = [] {
    core::Schema s;
    stats::declare_keys(s);
    return s;
  }();
  auto config = core::Config::from_string(std::string("[stats.scattering3d]\ncrop = ") + (crop ? "true" : "false"),
                                          "bench.toml", schema);
  return std::move(stats::kernels_from(config).front());
}

std::vector<float> lognormal(std::size_t n) {
  std::mt19937 gen(22);
  std::normal_distribution<float> g;
  std::vector<float> v(n);
  for (auto& x : v) x = std::exp(g(gen));
  return v;
}

// The denominator: the fastest known forward transform of the chunk, an FFTW_MEASURE r2c plan.
void fft_r2c_measured(benchmark::State& state) {
  fft::Buffer<float> in(std::size_t{n1} * n2 * n3);
  fft::Buffer<fft::cfloat> out(std::size_t{n1} * n2 * (n3 / 2 + 1));
  fftwf_plan p = fftwf_plan_dft_r2c_3d(n1, n2, n3, in.data(), reinterpret_cast<fftwf_complex*>(out.data()),
                                       FFTW_MEASURE);  // planning overwrites `in`: fill afterwards
  const auto x = lognormal(in.size());
  std::copy(x.begin(), x.end(), in.data());
  for (auto _ : state) {
    fftwf_execute(p);
    benchmark::DoNotOptimize(out.data());
  }
  fftwf_destroy_plan(p);
}
BENCHMARK(fft_r2c_measured)->Unit(benchmark::kMillisecond);

void scattering3d(benchmark::State& state, bool crop) {
  auto k = kernel(crop);
  const auto x = lognormal(std::size_t{n1} * n2 * n3);
  stats::Geometry g{{n1, n2, n3}};
  benchmark::DoNotOptimize(k->measure(x.data(), g));  // filters and plans built outside the timing
  for (auto _ : state) benchmark::DoNotOptimize(k->measure(x.data(), g));
}
BENCHMARK_CAPTURE(scattering3d, cropped, true)->Unit(benchmark::kMillisecond);
BENCHMARK_CAPTURE(scattering3d, full, false)->Unit(benchmark::kMillisecond);

}  // namespace

/// Wall and CPU seconds per iteration of each run (on a shared machine wall time includes waiting for a core).
class Collect : public benchmark::ConsoleReporter {
 public:
  std::map<std::string, double> wall, cpu;
  void ReportRuns(const std::vector<Run>& runs) override {
    for (const auto& r : runs)
      if (r.run_type == Run::RT_Iteration && r.iterations > 0) {
        wall[r.benchmark_name()] = r.real_accumulated_time / static_cast<double>(r.iterations);
        cpu[r.benchmark_name()] = r.cpu_accumulated_time / static_cast<double>(r.iterations);
      }
    ConsoleReporter::ReportRuns(runs);
  }
};

int main(int argc, char** argv) {
  benchmark::Initialize(&argc, argv);
  Collect c;
  benchmark::RunSpecifiedBenchmarks(&c);
  auto ratio = [&](const char* what, const char* a, const char* b, const char* target) {
    if (c.wall.count(a) && c.wall.count(b))
      std::printf("%-62s wall %6.1f  cpu %6.1f   (%s)\n", what, c.wall[a] / c.wall[b], c.cpu[a] / c.cpu[b], target);
  };
  std::printf("\nseconds per call (one thread):\n");
  for (const auto& [name, sec] : c.wall) std::printf("  %-28s wall %.4f s  cpu %.4f s\n", name.c_str(), sec, c.cpu[name]);
  std::printf("ratios (same run):\n");
  ratio("scattering3d 128x128x64 J=4 M=3 (cropped) / r2c FFT (MEASURE)", "scattering3d/cropped", "fft_r2c_measured",
        "target <= 40");
  ratio("scattering3d full resolution / r2c FFT (MEASURE)", "scattering3d/full", "fft_r2c_measured", "reference");
  ratio("speed-up of cropping: full / cropped", "scattering3d/full", "scattering3d/cropped", "higher is better");
  benchmark::Shutdown();
  return 0;
}
