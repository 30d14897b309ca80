// The fft wrapper's cost over a bare FFTW execute of the same plan: r2c 3D and
// c2c 2D, float, measured in the same run and printed as ratios (target ≤ 1.05).
// Both measured (FFTW_MEASURE): the bare plan is made after the wrapper's, from the
// same wisdom, so both run the same algorithm.
//   bench_fft [--n=128] [benchmark flags]
#include <benchmark/benchmark.h>
#include <fftw3.h>

#include <cstdio>
#include <cstring>
#include <map>
#include <string>

#include "fft/fft.hpp"
#include "fft/planning.hpp"
#include "bench_support.hpp"

using namespace spinflip;

namespace {
std::size_t n = 128;
std::map<std::string, double> seconds_per_call;

void record(benchmark::State& state, const std::string& name) {
  state.counters["s_per_call"] = benchmark::Counter(static_cast<double>(state.iterations()),
                                                    benchmark::Counter::kIsRate | benchmark::Counter::kInvert);
  (void)name;
}

void wrapper_r2c_3d(benchmark::State& state) {
  const std::array<std::size_t, 3> shape{n, n, n};
  fft::Buffer<float> in(n * n * n);
  fft::Buffer<fft::cfloat> out(n * n * (n / 2 + 1));
  for (std::size_t i = 0; i < in.size(); ++i) in[i] = static_cast<float>(i % 17);
  fft::r2c_3d(shape, in.data(), out.data());  // plan outside the timing
  for (auto _ : state) {
    fft::r2c_3d(shape, in.data(), out.data());
    benchmark::DoNotOptimize(out.data());
  }
  record(state, "wrapper_r2c_3d");
}

void bare_r2c_3d(benchmark::State& state) {
  fft::Buffer<float> in(n * n * n);
  fft::Buffer<fft::cfloat> out(n * n * (n / 2 + 1));
  for (std::size_t i = 0; i < in.size(); ++i) in[i] = static_cast<float>(i % 17);
  const int N = static_cast<int>(n);
  fftwf_plan p = fftwf_plan_dft_r2c_3d(N, N, N, in.data(), reinterpret_cast<fftwf_complex*>(out.data()), FFTW_MEASURE);
  for (auto _ : state) {
    fftwf_execute(p);
    benchmark::DoNotOptimize(out.data());
  }
  fftwf_destroy_plan(p);
  record(state, "bare_r2c_3d");
}

void wrapper_c2c_2d(benchmark::State& state) {
  const std::size_t m = 4 * n;
  fft::Buffer<fft::cfloat> in(m * m), out(m * m);
  for (std::size_t i = 0; i < in.size(); ++i) in[i] = static_cast<float>(i % 13);
  fft::c2c_2d(m, m, in.data(), out.data(), fft::Direction::forward);
  for (auto _ : state) {
    fft::c2c_2d(m, m, in.data(), out.data(), fft::Direction::forward);
    benchmark::DoNotOptimize(out.data());
  }
  record(state, "wrapper_c2c_2d");
}

void bare_c2c_2d(benchmark::State& state) {
  const std::size_t m = 4 * n;
  fft::Buffer<fft::cfloat> in(m * m), out(m * m);
  for (std::size_t i = 0; i < in.size(); ++i) in[i] = static_cast<float>(i % 13);
  const int M = static_cast<int>(m);
  fftwf_plan p = fftwf_plan_dft_2d(M, M, reinterpret_cast<fftwf_complex*>(in.data()),
                                   reinterpret_cast<fftwf_complex*>(out.data()), FFTW_FORWARD, FFTW_MEASURE);
  for (auto _ : state) {
    fftwf_execute(p);
    benchmark::DoNotOptimize(out.data());
  }
  fftwf_destroy_plan(p);
  record(state, "bare_c2c_2d");
}

}  // namespace

int main(int argc, char** argv) {
  for (int i = 1; i < argc; ++i)
    if (std::strncmp(argv[i], "--n=", 4) == 0) n = std::stoul(argv[i] + 4);
  fft::set_planning({fft::Rigor::measure, 600});
  // Interleave wrapper and bare runs so that machine noise hits both alike.
  for (int rep = 0; rep < 3; ++rep) {
    benchmark::RegisterBenchmark(("wrapper_r2c_3d/" + std::to_string(rep)).c_str(), wrapper_r2c_3d)->MinTime(0.3);
    benchmark::RegisterBenchmark(("bare_r2c_3d/" + std::to_string(rep)).c_str(), bare_r2c_3d)->MinTime(0.3);
    benchmark::RegisterBenchmark(("wrapper_c2c_2d/" + std::to_string(rep)).c_str(), wrapper_c2c_2d)->MinTime(0.3);
    benchmark::RegisterBenchmark(("bare_c2c_2d/" + std::to_string(rep)).c_str(), bare_c2c_2d)->MinTime(0.3);
  }
  benchmark::Initialize(&argc, argv);
  bench::SecondsPerIteration reporter;
  benchmark::RunSpecifiedBenchmarks(&reporter);
  seconds_per_call = reporter.seconds;
  auto best = [](const std::string& prefix) {
    double b = 1e300;
    for (const auto& [name, t] : seconds_per_call)
      if (name.rfind(prefix, 0) == 0) b = std::min(b, t);
    return b;
  };
  std::printf("r2c 3D %zu^3: wrapper/bare = %.3f (target <= 1.05)\n", n, best("wrapper_r2c_3d") / best("bare_r2c_3d"));
  std::printf("c2c 2D %zu^2: wrapper/bare = %.3f (target <= 1.05)\n", 4 * n, best("wrapper_c2c_2d") / best("bare_c2c_2d"));
  benchmark::Shutdown();
}
