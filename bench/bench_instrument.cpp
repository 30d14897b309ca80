// Applying a full scenario (uv mask + thermal noise + wedge) to a cone, against
// the FFT work it implies, measured in the same run: one 3D r2c plus one 3D c2r
// of the cone (the same transverse 2D and LOS 1D transforms apply() does), with the
// fastest plans: measured (FFTW_MEASURE), out of place or in place on padded rows,
// whichever runs faster (both printed). The scenarios are timed with measured plans
// and, as before issue 18, with FFTW_ESTIMATE ones. uv gridding happens once in
// scenarios_from and is timed separately.
//   bench_instrument [--n_perp=128] [--n_los=1024]   (target: apply <= 2 x FFTs)
#include <benchmark/benchmark.h>
#include <mpi.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstring>
#include <map>
#include <string>

#include "core/config.hpp"
#include "cosmo/cosmology.hpp"
#include "fft/fft.hpp"
#include "fft/planning.hpp"
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

using bench::use_plans;

void apply_scenario(benchmark::State& state, const char* name, bool measured) {
  use_plans(measured);
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

void its_transforms(benchmark::State& state, bool in_place) {
  use_plans(true);
  const std::array<std::size_t, 3> shape{n_perp, n_perp, n_los};
  const std::size_t h = n_perp * n_perp * (n_los / 2 + 1);
  fft::Buffer<float> real(in_place ? 2 * h : n_perp * n_perp * n_los);
  fft::Buffer<fft::cfloat> spec(in_place ? 0 : h);
  auto* c = in_place ? reinterpret_cast<fft::cfloat*>(real.data()) : spec.data();
  std::fill_n(real.data(), real.size(), 0.25f);
  fft::r2c_3d(shape, real.data(), c);  // plan outside the timing
  fft::c2r_3d(shape, c, real.data());
  for (auto _ : state) {
    fft::r2c_3d(shape, real.data(), c);
    fft::c2r_3d(shape, c, real.data());
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
  using benchmark::RegisterBenchmark;
  const auto ms = benchmark::kMillisecond;
  RegisterBenchmark("apply_full_scenario", apply_scenario, "full", true)->Iterations(3)->Unit(ms);
  RegisterBenchmark("apply_resolution_only", apply_scenario, "resolution", true)->Iterations(3)->Unit(ms);
  RegisterBenchmark("apply_resolution_noise", apply_scenario, "noise", true)->Iterations(3)->Unit(ms);
  RegisterBenchmark("its_transforms_out_of_place", its_transforms, false)->Iterations(3)->Unit(ms);
  RegisterBenchmark("its_transforms_in_place", its_transforms, true)->Iterations(3)->Unit(ms);
  RegisterBenchmark("apply_full_scenario_estimate", apply_scenario, "full", false)->Iterations(3)->Unit(ms);
  benchmark::Initialize(&argc, argv);
  bench::SecondsPerIteration reporter(bench::SecondsPerIteration::Clock::cpu);
  benchmark::RunSpecifiedBenchmarks(&reporter);
  for (const auto& [name, t] : reporter.seconds) seconds[name] = t;
  const double a = seconds["apply_full_scenario/iterations:3"];
  const double t_out = seconds["its_transforms_out_of_place/iterations:3"];
  const double t_in = seconds["its_transforms_in_place/iterations:3"];
  const double t = std::min(t_out, t_in);
  const char* layout = t_out <= t_in ? "out of place" : "in place";
  std::printf("its transforms (r2c + c2r 3D, measured): out of place %.3f s, in place %.3f s\n", t_out, t_in);
  std::printf("resolution only / transforms = %.2f, resolution + noise / transforms = %.2f\n",
              seconds["apply_resolution_only/iterations:3"] / t, seconds["apply_resolution_noise/iterations:3"] / t);
  std::printf("cone %zux%zux%zu (CPU time): full apply %.3f s, its fastest transforms (%s, measured) %.3f s: "
              "ratio %.2f (target <= 2); uv gridding once per campaign: %.2f x one apply\n",
              n_perp, n_perp, n_los, a, layout, t, a / t, seconds["uv_gridding_once"] / a);
  const double e = seconds["apply_full_scenario_estimate/iterations:3"];
  std::printf("before (FFTW_ESTIMATE plans): full apply %.3f s, ratio to the fastest transforms %.2f; "
              "measured plans speed it up %.2f x\n", e, e / t, e / a);
  benchmark::Shutdown();
  fixture = nullptr;
  MPI_Finalize();
}
