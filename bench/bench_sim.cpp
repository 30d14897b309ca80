// Light-cone generation time against the FFTs it must do (one forward
// transform of the initial conditions, one inverse for the density, one for
// the velocity gradient and one per smoothing radius), measured in the same
// run, and the generator's peak memory per cell.
//   bench_sim [--n_perp=128] [--n_los=1024] [--radii=40] [--rounds=3] [--zeldovich] [--spin] [benchmark flags]
// --spin: the spin temperature cell by cell (2 Mpc cells from z = 6 to the cone's far end, steps
// of 0.02 in ln(1+z) from z = 35, 12 shells); its transforms are one per shell and redshift node
// (the first shell once), as `spinflip plan` counts them, and the peak memory is compared with
// plan's generator estimate for the same cone.
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
#include "campaign/plan.hpp"
#include "campaign/schema.hpp"
#include "core/config.hpp"
#include "sim/cosmic_dawn.hpp"
#include "sim/lightcone.hpp"
#include "bench_support.hpp"

using namespace spinflip;

namespace {

std::size_t n_perp = 128, n_los = 1024, n_radii = 40, rounds = 3;
bool zeldovich = false, spin = false;

/// Inverse transforms the generator does: density (or three displacement components), the
/// velocity gradient, one per radius.
sim::ConeSettings bench_settings();
std::size_t spin_transforms() {
  if (!spin) return 0;
  const auto s = bench_settings();
  const cosmo::Cosmology c;
  const double z_near = c.redshift_at_comoving_distance(c.comoving_distance_mpc(s.z_min) + 0.5 * s.cell_mpc);
  return (sim::detail::dawn_redshift_nodes(s, z_near).size() - 1) * (s.spin.n_shells - 1) + 1;
}
/// Counted once (spin_transforms builds a cosmology: not something to redo inside the timed loop).
std::size_t inverse_transforms() {
  static const std::size_t n = (zeldovich ? 3 : 1) + 1 + n_radii + spin_transforms();
  return n;
}

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
  if (spin) {  // cosmic dawn through reionization: the cone spans z = 6 to its far end
    s.cell_mpc = 2.0;
    s.z_min = 6.0;
    const cosmo::Cosmology c;
    s.z_max = c.redshift_at_comoving_distance(c.comoving_distance_mpc(6.0) + 0.999 * double(n_los) * s.cell_mpc);
    s.spin.enabled = true;
    s.spin.start_redshift = std::max(35.0, s.z_max + 0.1);
  }
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

// Each inverse starts from a fresh copy of one spectrum (as the generator's filters write a fresh
// spectrum before each inverse): an in-place inverse repeated on its own output overflows to
// inf/NaN after a few transforms, which is no fair reference for hundreds of them. The copies are
// timed alone (its_copies) and subtracted, so the denominator is the transforms only.
void transforms_with(benchmark::State& state, bool transform) {
  fft::SlabField f({n_perp, n_perp, n_los}, MPI_COMM_SELF), spectrum({n_perp, n_perp, n_los}, MPI_COMM_SELF);
  // A pseudo-random field (a short periodic pattern would leave a spectrum of spikes and rounding
  // residues whose subnormal values slow every transform several times over).
  for (std::size_t q = 0; q < spectrum.allocated_floats(); ++q)
    spectrum.real_data()[q] = static_cast<float>((q * 2654435761u) % 1000u) / 500.0f - 1.0f;
  spectrum.forward();
  const std::size_t modes = f.local_n0() * n_perp * f.half_n2();
  for (auto _ : state) {
    std::copy_n(spectrum.real_data(), spectrum.allocated_floats(), f.real_data());
    if (transform) f.forward();
    for (std::size_t i = 0; i < inverse_transforms(); ++i) {
      std::copy_n(spectrum.complex_data(), modes, f.complex_data());
      if (transform) f.inverse();
    }
    benchmark::DoNotOptimize(f.real_data());
  }
}
void transforms(benchmark::State& state) { transforms_with(state, true); }
void copies(benchmark::State& state) { transforms_with(state, false); }

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
    else if (a == "--spin") spin = true;
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
    std::printf("cone %zu x %zu x %zu, %zu radii%s%s: peak memory %.1f bytes per cell (target <= 48)\n", n_perp,
                n_perp, n_los, n_radii, zeldovich ? ", Zel'dovich density" : "", spin ? ", spin temperature" : "",
                double(peak - before) * 1024.0 / cells);
    if (spin) {  // plan's generator estimate for the same cone (src/campaign/plan.cpp)
      char text[512];
      std::snprintf(text, sizeof text,
                    "[campaign]\nname = \"b\"\nseed = 1\n[cone]\nn_perp = %zu\nn_los = %zu\ncell_mpc = %.17g\n"
                    "z_min = %.17g\nz_max = %.17g\n[sources]\nbubble_radius_max_mpc = %.17g\nn_radii = %zu\n"
                    "[spin_temperature]\nenabled = true\nstart_redshift = %.17g\n",
                    s.n_perp, s.n_los, s.cell_mpc, s.z_min, s.z_max, s.bubble_radius_max_mpc, s.n_radii, s.spin.start_redshift);
      const auto cfg = core::Config::from_string(text, "bench.toml", campaign::campaign_schema());
      const double planned = campaign::estimate_memory(cfg, 0, 1).generator;
      std::printf("plan's generator estimate %.1f MB, measured peak %.1f MB: measured/plan %.3f (target within 15%%)\n",
                  planned / 1e6, double(peak - before) * 1024.0 / 1e6, double(peak - before) * 1024.0 / planned);
    }
  }

  for (std::size_t r = 0; r < rounds; ++r) {
    const std::string round = "/round:" + std::to_string(r);
    benchmark::RegisterBenchmark(("generate_cone" + round).c_str(), generate)->Unit(benchmark::kSecond)->Iterations(1);
    benchmark::RegisterBenchmark(("its_transforms" + round).c_str(), transforms)->Unit(benchmark::kSecond)->Iterations(1);
    benchmark::RegisterBenchmark(("its_copies" + round).c_str(), copies)->Unit(benchmark::kSecond)->Iterations(1);
  }
  Collect reporter(Collect::Clock::cpu);
  benchmark::RunSpecifiedBenchmarks(&reporter);
  double g_min = 0, t_min = 0;
  std::string per_round;
  for (std::size_t r = 0; r < rounds; ++r) {
    const std::string round = "/round:" + std::to_string(r) + "/iterations:1";
    const auto g = reporter.seconds.find("generate_cone" + round), t = reporter.seconds.find("its_transforms" + round),
               cp = reporter.seconds.find("its_copies" + round);
    if (g == reporter.seconds.end() || t == reporter.seconds.end() || cp == reporter.seconds.end()) continue;
    const double pure = t->second - cp->second;
    g_min = g_min == 0 ? g->second : std::min(g_min, g->second);
    t_min = t_min == 0 ? pure : std::min(t_min, pure);
    char buf[32];
    std::snprintf(buf, sizeof buf, " %.2f", g->second / pure);
    per_round += buf;
  }
  if (g_min > 0 && t_min > 0)
    std::printf("generation %.3f s, its %zu transforms %.3f s (CPU, fastest of %zu rounds): ratio %.2f (target <= %s); "
                "per round:%s\n", g_min, inverse_transforms() + 1, t_min, rounds, g_min / t_min, spin ? "3" : "1.5", per_round.c_str());
  benchmark::Shutdown();
  MPI_Finalize();
  return 0;
}
