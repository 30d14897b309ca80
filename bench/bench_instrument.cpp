// Applying a full scenario (uv mask + thermal noise + wedge) to a cone, against
// the FFT work it implies, measured in the same run: one 3D r2c plus one 3D c2r
// of the cone (the same transverse 2D and LOS 1D transforms apply() does).
// uv gridding happens once in scenarios_from and is timed separately.
//   bench_instrument [--n_perp=128] [--n_los=1024]   (target: apply <= 2 x FFTs)
#include <benchmark/benchmark.h>
#include <mpi.h>

#include <chrono>
#include <cstdio>
#include <cstring>
#include <map>
#include <string>

#include "core/config.hpp"
#include "cosmo/cosmology.hpp"
#include "fft/fft.hpp"
#include "instrument/instrument.hpp"
#include "bench_support.hpp"

using namespace spinflip;

namespace {
std::size_t n_perp = 128, n_los = 1024;
std::map<std::string, double> seconds;

instrument::ConeGeometry geometry(const cosmo::Cosmology& c) {
  instrument::ConeGeometry g;
  g.shape = {n_perp, n_perp, n_los};
  g.cell_mpc = 2.0;
  const double d0 = c.comoving_distance_mpc(6.0);
  for (std::size_t k = 0; k < n_los; ++k) {
    const double d = d0 + g.cell_mpc * (static_cast<double>(k) + 0.5);
    const double z = c.redshift_at_comoving_distance(d);
    g.distance_mpc.push_back(d);
    g.z.push_back(z);
    g.freq_MHz.push_back(cosmo::frequency_MHz(z));
  }
  return g;
}

core::Config scenario_config() {
  static core::Schema schema = [] {
    core::Schema s;
    instrument::declare_keys(s);
    return s;
  }();
  return core::Config::from_string(
      "[scenarios.full]\narray = \"builtin\"\nstations = 64\nnoise = true\nwedge = true\n"
      "[scenarios.resolution]\narray = \"builtin\"\nstations = 64\n"
      "[scenarios.noise]\narray = \"builtin\"\nstations = 64\nnoise = true\n"
      "[chunks]\nbandwidth_MHz = 8.0\n",
      "bench", schema);
}

struct Fixture {
  cosmo::Cosmology cosmology;
  instrument::ConeGeometry g = geometry(cosmology);
  core::Config config = scenario_config();
  std::vector<instrument::Scenario> scenarios;
  core::Array3<float> cone{n_perp, n_perp, n_los};
  Fixture() {
    const auto t0 = std::chrono::steady_clock::now();
    scenarios = instrument::scenarios_from(config, cosmology, g);
    seconds["uv_gridding_once"] = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    for (std::size_t i = 0; i < cone.size(); ++i) cone.data[i] = static_cast<float>((i * 2654435761u) % 1000) * 0.01f;
  }
};
Fixture* fixture = nullptr;

void apply_scenario(benchmark::State& state, const char* name) {
  auto cone = fixture->cone;
  std::size_t which = 0;
  while (fixture->scenarios.at(which).name() != name) ++which;
  std::uint64_t r = 0;
  // Plans are made once per cone shape and kept; make them outside the timing, as the
  // transforms below have theirs made by the fft module's cache on first use.
  fixture->scenarios.at(which).apply(cone, fixture->g, rng::EntryKey{1, 0, r++});
  for (auto _ : state) {
    fixture->scenarios.at(which).apply(cone, fixture->g, rng::EntryKey{1, 0, r++});
    benchmark::DoNotOptimize(cone.data.data());
  }
}

void its_transforms(benchmark::State& state) {
  const std::array<std::size_t, 3> shape{n_perp, n_perp, n_los};
  fft::Buffer<float> real(n_perp * n_perp * n_los);
  fft::Buffer<fft::cfloat> spec(n_perp * n_perp * (n_los / 2 + 1));
  std::copy(fixture->cone.data.begin(), fixture->cone.data.end(), real.data());
  fft::r2c_3d(shape, real.data(), spec.data());  // plan outside the timing
  fft::c2r_3d(shape, spec.data(), real.data());
  for (auto _ : state) {
    fft::r2c_3d(shape, real.data(), spec.data());
    fft::c2r_3d(shape, spec.data(), real.data());
    benchmark::DoNotOptimize(real.data());
  }
}

// Ratios use CPU time: the 2-core machine is shared, and wall time there measures the load.
}  // namespace

int main(int argc, char** argv) {
  MPI_Init(&argc, &argv);
  for (int i = 1; i < argc; ++i) {
    if (std::strncmp(argv[i], "--n_perp=", 9) == 0) n_perp = std::stoul(argv[i] + 9);
    if (std::strncmp(argv[i], "--n_los=", 8) == 0) n_los = std::stoul(argv[i] + 8);
  }
  Fixture f;
  fixture = &f;
  benchmark::RegisterBenchmark("apply_full_scenario", apply_scenario, "full")->Iterations(3)->Unit(benchmark::kMillisecond);
  benchmark::RegisterBenchmark("apply_resolution_only", apply_scenario, "resolution")->Iterations(3)->Unit(benchmark::kMillisecond);
  benchmark::RegisterBenchmark("apply_resolution_noise", apply_scenario, "noise")->Iterations(3)->Unit(benchmark::kMillisecond);
  benchmark::RegisterBenchmark("its_transforms", its_transforms)->Iterations(3)->Unit(benchmark::kMillisecond);
  benchmark::Initialize(&argc, argv);
  bench::SecondsPerIteration reporter(bench::SecondsPerIteration::Clock::cpu);
  benchmark::RunSpecifiedBenchmarks(&reporter);
  for (const auto& [name, t] : reporter.seconds) seconds[name] = t;
  const double a = seconds["apply_full_scenario/iterations:3"], t = seconds["its_transforms/iterations:3"];
  std::printf("resolution only / transforms = %.2f, resolution + noise / transforms = %.2f\n",
              seconds["apply_resolution_only/iterations:3"] / t, seconds["apply_resolution_noise/iterations:3"] / t);
  std::printf("cone %zux%zux%zu (CPU time): full apply %.3f s, its transforms %.3f s: ratio %.2f (target <= 2); "
              "uv gridding once per campaign: %.2f x one apply\n",
              n_perp, n_perp, n_los, a, t, a / t, seconds["uv_gridding_once"] / a);
  benchmark::Shutdown();
  fixture = nullptr;
  MPI_Finalize();
}
