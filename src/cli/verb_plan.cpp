// spinflip plan CAMPAIGN: validate the campaign, print its designs, entries,
// cone, units and per-rank memory, and refuse (exit 2) what cannot run.
#include <mpi.h>

#include <chrono>
#include <cstdio>
#include <optional>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <sstream>
#include <unistd.h>

#include "campaign/campaign.hpp"
#include "campaign/plan.hpp"
#include "cli/verbs.hpp"
#include "core/errors.hpp"
#include "core/log.hpp"
#include "fft/planning.hpp"
#include "core/output_file.hpp"
#ifdef SPINFLIP_HAVE_DRIVER
#include "campaign/driver.hpp"
#include "catalogue/hdf5.hpp"
#endif

namespace spinflip::cli {
namespace {

struct PlanArgs {
  std::string campaign_file, points_csv;
  double memory_limit_gb = 0;
  int ranks_per_node = 0;
  int group_size = 0;
  bool probe = false;
  bool scan = false;
  bool fft_plans = false;
};

[[maybe_unused]] std::string fmt(double v, int precision = 3) {
  std::ostringstream os;
  os.precision(precision);
  os << v;
  return os.str();
}

#ifdef SPINFLIP_HAVE_DRIVER
// One entry through the real driver (spinflip run with max_entries = 1) on this
// rank alone, into a scratch catalogue that is removed afterwards. The entry's
// own wall time comes from the catalogue; the rest of the run is setup (scenario
// uv tables, catalogue creation), paid once per run and rank.
struct ProbeResult { double entry_s = 0, total_s = 0; };

ProbeResult probe_one_entry(const campaign::Campaign& c, double memory_limit_gb) {
  namespace fs = std::filesystem;
  const fs::path dir = fs::temp_directory_path() / ("spinflip-probe-" + std::to_string(::getpid()));
  struct Cleanup {
    fs::path d;
    ~Cleanup() {
      std::error_code ec;
      fs::remove_all(d, ec);
    }
  } cleanup{dir};
  fs::create_directories(dir);
  campaign::RunOptions opt;
  opt.output = dir / "probe.h5";
  opt.group_size = 1;  // the probe runs on one rank; the memory estimate above covers the group
  opt.max_entries = 1;
  opt.memory_limit_gb = memory_limit_gb;
  log::init(0, 1, log::Verbosity::quiet);  // the driver's progress lines are not plan's output
  const auto t0 = std::chrono::steady_clock::now();
  const auto result = campaign::run(c, opt, MPI_COMM_SELF);
  const double total = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  log::init(world_rank(), world_size(), log::Verbosity::normal);
  if (result.ran != 1) throw InternalError("plan --probe: the driver ran " + std::to_string(result.ran) + " entries");
  if (result.failed > 0)
    throw ModelError("plan --probe: the first entry failed (see spinflip status on a real run); no timing");
  namespace h5 = catalogue::h5;
  h5::Handle file = h5::file(SPINFLIP_H5_ID(H5Fopen(opt.output.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT)));
  h5::Handle ds = h5::dataset(SPINFLIP_H5_ID(H5Dopen2(file, "/entries/wall_time_s", H5P_DEFAULT)));
  std::vector<double> t(static_cast<std::size_t>(h5::dims(ds).at(0)));
  SPINFLIP_H5(H5Dread(ds, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, t.data()));
  ProbeResult r{0, total};
  for (double x : t)
    if (std::isfinite(x)) r.entry_s = x;
  return r;
}
#endif

int ranks_on_this_node() {
  MPI_Comm local;
  SPINFLIP_CHECK_MPI(MPI_Comm_split_type(MPI_COMM_WORLD, MPI_COMM_TYPE_SHARED, 0, MPI_INFO_NULL, &local));
  int n = 1;
  MPI_Comm_size(local, &n);
  MPI_Comm_free(&local);
  return n;
}

RegisterVerb plan_verb(
    "plan", "validate a campaign: designs, entries, memory estimate; exit 2 if it cannot run", 10,
    [](CLI::App& sub) -> VerbRun {
      auto a = std::make_shared<PlanArgs>();
      sub.add_option("campaign", a->campaign_file, "campaign file (TOML)")->required();
      sub.add_option("--memory-limit-gb", a->memory_limit_gb,
                     "per-rank memory limit in GB (default: campaign.memory_limit_gb, else the node's "
                     "MemAvailable / ranks per node)")
          ->check(CLI::PositiveNumber);
      sub.add_option("--ranks-per-node", a->ranks_per_node,
                     "ranks the run will place on one node (default: the ranks of this launch on this node)")
          ->check(CLI::PositiveNumber);
      sub.add_option("--group-size", a->group_size,
                     "ranks that will share one light cone, as run's --group-size (default: campaign.group_size)")
          ->check(CLI::PositiveNumber);
#ifdef SPINFLIP_HAVE_DRIVER
      sub.add_flag("--fft-plans", a->fft_plans,
                   "make the FFT plans the campaign needs and keep their wisdom in the user cache, printing the "
                   "planning time of each (run under as many ranks as a group to include its distributed plans)");
      sub.add_flag("--probe", a->probe,
                   "time one entry through the driver (on rank 0, scratch catalogue) and estimate the campaign's cost");
#endif
      sub.add_flag("--scan", a->scan,
                   "with [ingest]: read every cone file's data too and report NaN/Inf (slow for big files)");
      sub.add_option("--points-csv", a->points_csv,
                     "also write the design points (point, design, role, seed_point, parameters...) to this CSV file "
                     "(default: none)");
      return [a]() {
        const auto c = campaign::Campaign::load(a->campaign_file);
        campaign::PlanOptions opt;
        opt.memory_limit_gb = a->memory_limit_gb;
        opt.scan = a->scan;
        opt.group_size = static_cast<std::size_t>(a->group_size);
        opt.ranks_per_node = a->ranks_per_node > 0 ? a->ranks_per_node : ranks_on_this_node();
        const auto report = campaign::plan(c, opt);
#ifdef SPINFLIP_HAVE_DRIVER
        std::optional<fft::SharedWisdom> plans;  // collective: every rank takes part
        if (a->fft_plans && report.problems.empty())
          plans = campaign::prepare_fft_plans(c, std::nullopt, MPI_COMM_WORLD);
#endif
        if (world_rank() != 0) return report.problems.empty() ? 0 : 2;
        if (!a->points_csv.empty()) {
          core::write_text_file(a->points_csv, campaign::points_csv(c), "--points-csv");
        }
        for (const auto& line : report.lines) std::cout << line << "\n";
        std::cout.flush();
        for (const auto& w : report.warnings) std::cerr << "spinflip: warning: " << w << "\n";
        for (const auto& p : report.problems) std::cerr << "spinflip: error: " << p << "\n";
        if (!report.problems.empty()) {
          std::cerr << "spinflip: plan: " << report.problems.size() << " problem"
                    << (report.problems.size() == 1 ? "" : "s") << ": the campaign cannot run as it is\n";
          return 2;
        }
#ifdef SPINFLIP_HAVE_DRIVER
        if (plans) {
          const auto cache = fft::wisdom_cache_from(c.config());
          const auto rigor = fft::planning();
          std::cout << "fft plans (" << c.config().string("fft.planning") << ", at most " << fmt(rigor.time_limit_s)
                    << " s each): " << plans->made.size() << " plans in " << fmt(plans->seconds) << " s; wisdom sha256 "
                    << plans->sha256 << (cache ? ", kept in " + cache->string() : std::string(", not kept (wisdom_cache = \"none\")"))
                    << "\n";
          for (const auto& r : plans->made) {
            char line[64];
            std::snprintf(line, sizeof line, "  %9.3f s  %-24s ", r.seconds, r.how.c_str());
            std::cout << line << r.problem << "\n";
          }
        }
        if (a->probe) {
          const auto p = probe_one_entry(c, a->memory_limit_gb);
          const double n = static_cast<double>(c.entries().size());
          const double rank_hours = n * p.entry_s / 3600.0;
          std::cout << "probe: one entry (point " << c.entries().front().point << ", "
                    << campaign::role_name(c.points()[c.entries().front().point].role) << ") took " << fmt(p.entry_s)
                    << " s, setup " << fmt(std::max(0.0, p.total_s - p.entry_s)) << " s per run\n"
                    << "estimate: " << c.entries().size() << " entries × " << fmt(p.entry_s) << " s = "
                    << fmt(rank_hours, 3) << " rank-hours (group size 1); on " << opt.ranks_per_node
                    << " ranks ≈ " << fmt(n * p.entry_s / opt.ranks_per_node / 60.0 + (p.total_s - p.entry_s) / 60.0, 3)
                    << " min (entries vary in cost with their parameters)\n";
        }
#endif
        std::cout << "plan: OK, " << c.entries().size() << " entries\n";
        return 0;
      };
    });

}  // namespace
}  // namespace spinflip::cli
