// Light-cone generation time against the FFTs it must do (one forward
// transform of the initial conditions, one inverse for the density, one for
// the velocity gradient and one per smoothing radius), measured in the same
// run, and the generator's peak memory per cell.
//   bench_sim [--n_perp=128] [--n_los=1024] [--radii=40] [--rounds=3] [--zeldovich] [benchmark flags]
// --zeldovich: the Zel'dovich-displaced density (three inverse transforms for the displacement
// instead of the linear density's one, then the cloud-in-cell deposit).
// The target: generation ≤ 1.5 × transforms, peak ≤ 48 bytes per cell.
// Times are CPU seconds (a shared machine's load would swamp wall time), and the
// two are measured alternately in `rounds` rounds so that a change of load hits
// both; the ratio of the fastest of each is printed with every round's ratio.
// Both use the same FFTW plans (fft::SlabField, FFTW_ESTIMATE). The generator
// keeps its work storage between cones of one shape (sim/lightcone.cpp), and
// the transforms' field is made outside the timed loop alike.
#include <benchmark/benchmark.h>
#include <mpi.h>

#include <algorithm>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <fstream>
#include <map>
#include <string>

#include "cosmo/cosmology.hpp"
#include "fft/fft.hpp"
#include "sim/lightcone.hpp"
#include "bench_support.hpp"

using namespace spinflip;

namespace {

std::size_t n_perp = 128, n_los = 1024, n_radii = 40, rounds = 3;
bool zeldovich = false;

/// Inverse transforms the generator does: density (or three displacement components), the
/// velocity gradient, one per radius.
std::size_t inverse_transforms() { return (zeldovich ? 3 : 1) + 1 + n_radii; }

sim::ConeSettings bench_settings() {
  sim::ConeSettings s;
  s.n_perp = n_perp;
  s.n_los = n_los;
  s.cell_mpc = 1.5;
  s.z_min = 7.0;
  s.z_max = 7.2;
  s.bubble_radius_max_mpc = 30.0;
  s.n_radii = n_radii;
  s.zeldovich_displacement = zeldovich;
  return s;
}

void generate(benchmark::State& state) {
  const cosmo::Cosmology c;
  const auto s = bench_settings();
  std::uint64_t r = 0;
  for (auto _ : state) {
    auto cone = sim::generate_cone(s, c, rng::EntryKey{1, 0, r++}, MPI_COMM_SELF);
    benchmark::DoNotOptimize(cone.delta_tb_mK.data.data());
  }
}

void transforms(benchmark::State& state) {
  fft::SlabField f({n_perp, n_perp, n_los}, MPI_COMM_SELF);
  f.fill(0.5f);
  for (auto _ : state) {
    f.forward();
    for (std::size_t i = 0; i < inverse_transforms(); ++i) f.inverse();
    benchmark::DoNotOptimize(f.real_data());
  }
}

long status_kb(const char* field) {
  std::ifstream in("/proc/self/status");
  std::string line;
  const std::size_t n = std::strlen(field);
  while (std::getline(in, line))
    if (line.compare(0, n, field) == 0) return std::atol(line.c_str() + n + 1);
  return -1;
}

using Collect = bench::SecondsPerIteration;

}  // namespace

int main(int argc, char** argv) {
  MPI_Init(&argc, &argv);
  std::vector<char*> rest{argv[0]};
  for (int i = 1; i < argc; ++i) {
    std::string a = argv[i];
    auto value = [&](const char* p) { return static_cast<std::size_t>(std::atol(a.c_str() + std::strlen(p))); };
    if (a.rfind("--n_perp=", 0) == 0) n_perp = value("--n_perp=");
    else if (a.rfind("--n_los=", 0) == 0) n_los = value("--n_los=");
    else if (a.rfind("--radii=", 0) == 0) n_radii = value("--radii=");
    else if (a.rfind("--rounds=", 0) == 0) rounds = std::max<std::size_t>(1, value("--rounds="));
    else if (a == "--zeldovich") zeldovich = true;
    else rest.push_back(argv[i]);
  }
  int rc = static_cast<int>(rest.size());
  benchmark::Initialize(&rc, rest.data());
  const double cells = double(n_perp) * double(n_perp) * double(n_los);

  // Peak memory of one generation: reset the high-water mark (Linux clear_refs "5"), then VmHWM − VmRSS.
  {
    const cosmo::Cosmology c;
    const auto s = bench_settings();
    const long before = status_kb("VmRSS:");
    { std::ofstream("/proc/self/clear_refs") << "5"; }
    { auto cone = sim::generate_cone(s, c, rng::EntryKey{1, 0, 999}, MPI_COMM_SELF); }
    const long peak = status_kb("VmHWM:");
    std::printf("cone %zu x %zu x %zu, %zu radii%s: peak memory %.1f bytes per cell (target <= 48)\n", n_perp,
                n_perp, n_los, n_radii, zeldovich ? ", Zel'dovich density" : "", double(peak - before) * 1024.0 / cells);
  }

  for (std::size_t r = 0; r < rounds; ++r) {
    const std::string round = "/round:" + std::to_string(r);
    benchmark::RegisterBenchmark(("generate_cone" + round).c_str(), generate)->Unit(benchmark::kSecond)->Iterations(1);
    benchmark::RegisterBenchmark(("its_transforms" + round).c_str(), transforms)->Unit(benchmark::kSecond)->Iterations(1);
  }
  Collect reporter(Collect::Clock::cpu);
  benchmark::RunSpecifiedBenchmarks(&reporter);
  double g_min = 0, t_min = 0;
  std::string per_round;
  for (std::size_t r = 0; r < rounds; ++r) {
    const std::string round = "/round:" + std::to_string(r) + "/iterations:1";
    const auto g = reporter.seconds.find("generate_cone" + round), t = reporter.seconds.find("its_transforms" + round);
    if (g == reporter.seconds.end() || t == reporter.seconds.end()) continue;
    g_min = g_min == 0 ? g->second : std::min(g_min, g->second);
    t_min = t_min == 0 ? t->second : std::min(t_min, t->second);
    char buf[32];
    std::snprintf(buf, sizeof buf, " %.2f", g->second / t->second);
    per_round += buf;
  }
  if (g_min > 0 && t_min > 0)
    std::printf("generation %.3f s, its %zu transforms %.3f s (CPU, fastest of %zu rounds): ratio %.2f (target <= 1.5); "
                "per round:%s\n", g_min, inverse_transforms() + 1, t_min, rounds, g_min / t_min, per_round.c_str());
  benchmark::Shutdown();
  MPI_Finalize();
  return 0;
}
