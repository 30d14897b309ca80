// Ingest speed against the kernels it feeds (issue 9's target: reading a
// 128 × 128 × 1024 float32 cone from .npy takes ≤ 0.5 × the time of its
// kernels, measured in one run). "Its kernels": spherical power of the whole
// cube plus 2D power and one-point moments of every slice, default settings.
// The read includes the header check, resampling and the sha256 of the file.
// Options: --n_perp=N --n_los=N (defaults 128, 1024).
#include <benchmark/benchmark.h>
#include <mpi.h>
#include <unistd.h>

#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <map>
#include <random>

#include "cosmo/cosmology.hpp"
#include "ingest/ingest.hpp"
#include "stats/stats.hpp"
#include "bench_support.hpp"

using namespace spinflip;

namespace {

std::size_t n_perp = 128, n_los = 1024;
std::filesystem::path npy_file;

void write_npy(const std::filesystem::path& path, std::size_t n, std::size_t nl) {
  std::string header = "{'descr': '<f4', 'fortran_order': False, 'shape': (" + std::to_string(n) + ", " +
                       std::to_string(n) + ", " + std::to_string(nl) + "), }";
  while ((10 + header.size() + 1) % 64 != 0) header += ' ';
  header += '\n';
  std::ofstream out(path, std::ios::binary);
  out.write("\x93NUMPY\x01\x00", 8);
  const char len[2] = {static_cast<char>(header.size() & 0xff), static_cast<char>(header.size() >> 8)};
  out.write(len, 2);
  out.write(header.data(), static_cast<std::streamsize>(header.size()));
  std::mt19937 gen(1);
  std::normal_distribution<float> g(10.0f, 5.0f);
  std::vector<float> row(nl);
  for (std::size_t q = 0; q < n * n; ++q) {
    for (auto& v : row) v = g(gen);
    out.write(reinterpret_cast<const char*>(row.data()), static_cast<std::streamsize>(nl * 4));
  }
}

sim::ConeSettings settings() {
  sim::ConeSettings s;
  s.n_perp = n_perp;
  s.n_los = n_los;
  s.cell_mpc = 2.0;
  s.z_min = 7.0;
  return s;
}

ingest::Manifest manifest(const ingest::Target& t) {
  ingest::Manifest m;
  m.param_names = {"ionizing_efficiency"};
  m.layout.los = ingest::LosCoordinate::distance_mpc;
  m.layout.los_start = t.distance_mpc.front();
  m.layout.los_step = t.cell_mpc;
  m.rows.push_back({.file = npy_file, .values = {30.0}, .realisation = 0, .role = "list", .where = "bench"});
  return m;
}

void ingest_npy(benchmark::State& state) {
  const cosmo::Cosmology c;
  const auto t = ingest::target_from(settings(), c);
  const auto m = manifest(t);
  for (auto _ : state) {
    auto cone = ingest::read_cone(m, 0, t, c, MPI_COMM_SELF);
    benchmark::DoNotOptimize(cone.cone.delta_tb_mK.data.data());
  }
}

void its_kernels(benchmark::State& state) {
  static const core::Schema schema = [] {
    core::Schema s;
    stats::declare_keys(s);
    return s;
  }();
  const auto cfg = core::Config::from_string("[stats.power]\n[stats.slice_power]\n[stats.moments]\n", "bench.toml", schema);
  const auto kernels = stats::kernels_from(cfg);
  const cosmo::Cosmology c;
  const auto t = ingest::target_from(settings(), c);
  const auto cone = ingest::read_cone(manifest(t), 0, t, c, MPI_COMM_SELF).cone;
  const stats::Geometry cube{.shape = {n_perp, n_perp, n_los}, .cell_mpc = {2.0, 2.0, 2.0}};
  const stats::Geometry slice{.shape = {n_perp, n_perp}, .cell_mpc = {2.0, 2.0, 0.0}};
  std::vector<float> plane(n_perp * n_perp);
  for (auto _ : state) {
    for (const auto& k : kernels) {
      if (k->unit_kind() == stats::UnitKind::chunk) {
        benchmark::DoNotOptimize(k->measure(cone.delta_tb_mK.data.data(), cube));
        continue;
      }
      for (std::size_t s = 0; s < n_los; ++s) {
        for (std::size_t q = 0; q < n_perp * n_perp; ++q) plane[q] = cone.delta_tb_mK.data[q * n_los + s];
        benchmark::DoNotOptimize(k->measure(plane.data(), slice));
      }
    }
  }
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
    else rest.push_back(argv[i]);
  }
  int rc = static_cast<int>(rest.size());
  benchmark::Initialize(&rc, rest.data());
  npy_file = std::filesystem::temp_directory_path() / ("spinflip-bench-ingest-" + std::to_string(::getpid()) + ".npy");
  write_npy(npy_file, n_perp, n_los);
  benchmark::RegisterBenchmark("ingest_npy", ingest_npy)->Unit(benchmark::kMillisecond)->Iterations(3);
  benchmark::RegisterBenchmark("its_kernels", its_kernels)->Unit(benchmark::kMillisecond)->Iterations(1);
  Collect reporter;
  benchmark::RunSpecifiedBenchmarks(&reporter);
  const double r = reporter.seconds["ingest_npy/iterations:3"], k = reporter.seconds["its_kernels/iterations:1"];
  if (r > 0 && k > 0)
    std::printf("cone %zu x %zu x %zu float32 .npy: ingest %.3f s, its kernels %.3f s: ratio %.3f (target <= 0.5)\n",
                n_perp, n_perp, n_los, r, k, r / k);
  std::filesystem::remove(npy_file);
  benchmark::Shutdown();
  MPI_Finalize();
  return 0;
}
