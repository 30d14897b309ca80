// Catalogue write cost against the work of one entry, measured in the same run:
// writing an entry's rows (independent HDF5 writes, status last) against
// generating the entry's light cone, for a campaign's real layout.
//   bench_catalogue [--campaign=jobs/demo/campaign.toml] [benchmark flags]
// The target: catalogue writing ≤ 1% of a run's rank-seconds, so the
// ratio write / generation must stay well below 0.01 (generation is only part
// of an entry; instrument and kernels add to it).
#include <benchmark/benchmark.h>
#include <mpi.h>
#include <unistd.h>

#include <cstdio>
#include <cstring>
#include <filesystem>
#include <map>
#include <string>

#include "campaign/campaign.hpp"
#include "campaign/driver.hpp"
#include "catalogue/catalogue.hpp"
#include "cosmo/cosmology.hpp"
#include "sim/lightcone.hpp"
#include "bench_support.hpp"

using namespace spinflip;

namespace {

std::string campaign_file = "jobs/demo/campaign.toml";
const campaign::Campaign* the_campaign = nullptr;
catalogue::Catalogue* the_catalogue = nullptr;
catalogue::EntryResult the_result;

void write_entry(benchmark::State& state) {
  std::size_t e = 0;
  const std::size_t n = the_catalogue->n_entries();
  for (auto _ : state) the_catalogue->write_entry(e++ % n, the_result);
}

void generate_cone(benchmark::State& state) {
  const core::Config cfg = the_campaign->config_for_point(0);
  const sim::ConeSettings s = sim::settings_from(cfg);
  const cosmo::Cosmology c(cosmo::parameters_from(cfg));
  std::uint64_t r = 0;
  for (auto _ : state) {
    auto cone = sim::generate_cone(s, c, the_campaign->entry_key({0, r++}), MPI_COMM_SELF);
    benchmark::DoNotOptimize(cone.delta_tb_mK.data.data());
  }
}

using Collect = bench::SecondsPerIteration;

}  // namespace

int main(int argc, char** argv) {
  MPI_Init(&argc, &argv);
  std::vector<char*> rest;
  for (int i = 0; i < argc; ++i) {
    if (std::strncmp(argv[i], "--campaign=", 11) == 0)
      campaign_file = argv[i] + 11;
    else
      rest.push_back(argv[i]);
  }
  int rc = static_cast<int>(rest.size());
  benchmark::Initialize(&rc, rest.data());
  int status = 0;
  try {
    const auto c = campaign::Campaign::load(campaign_file);
    the_campaign = &c;
    const catalogue::Layout layout = campaign::layout_of(c);
    char dir[] = "/tmp/spinflip-bench-XXXXXX";
    const std::filesystem::path tmp = mkdtemp(dir);
    auto cat = catalogue::Catalogue::create(tmp / "bench.h5", layout, MPI_COMM_SELF);
    the_catalogue = &cat;
    the_result.x_hi.assign(layout.history_z.size(), 0.5);
    the_result.mean_tb_mK.assign(layout.history_z.size(), 10.0);
    std::size_t values = 0;
    for (const auto& s : layout.scenarios) {
      auto& row = the_result.values.emplace_back();
      for (const auto& k : s.kernels) {
        row.emplace_back(k.unit_z.size() * k.n_coeff, 1.25);
        values += k.unit_z.size() * k.n_coeff;
      }
    }
    std::printf("campaign %s: %zu entries, %zu history redshifts, %zu values per entry\n", campaign_file.c_str(),
                layout.entries.size(), layout.history_z.size(), values);
    benchmark::RegisterBenchmark("catalogue_write_entry", write_entry)->Unit(benchmark::kMillisecond);
    benchmark::RegisterBenchmark("generate_cone", generate_cone)->Unit(benchmark::kSecond)->Iterations(2);
    Collect reporter;
    benchmark::RunSpecifiedBenchmarks(&reporter);
    cat.close();
    std::uintmax_t bytes = std::filesystem::file_size(tmp / "bench.h5");
    std::printf("catalogue file: %.1f kB per entry (%.2f GB per 10^4 entries)\n",
                static_cast<double>(bytes) / 1e3 / static_cast<double>(layout.entries.size()),
                static_cast<double>(bytes) / static_cast<double>(layout.entries.size()) * 1e4 / 1e9);
    std::filesystem::remove_all(tmp);
    double w = 0, g = 0;
    for (auto& [name, s] : reporter.seconds) {
      if (name.rfind("catalogue_write_entry", 0) == 0) w = s;
      if (name.rfind("generate_cone", 0) == 0) g = s;
    }
    if (w > 0 && g > 0)
      std::printf("write one entry %.3f ms, generate its cone %.3f s: ratio %.2e (target well below 1e-2)\n", w * 1e3,
                  g, w / g);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "bench_catalogue: %s\n", e.what());
    status = 1;
  }
  MPI_Finalize();
  return status;
}
