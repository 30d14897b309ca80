// spinflip plan CAMPAIGN: validate the campaign, print its designs, entries,
// cone, units and per-rank memory, and refuse (exit 2) what cannot run.
#include <mpi.h>

#include <fstream>
#include <iostream>

#include "campaign/campaign.hpp"
#include "campaign/plan.hpp"
#include "cli/verbs.hpp"
#include "core/errors.hpp"

namespace spinflip::cli {
namespace {

struct PlanArgs {
  std::string campaign_file, points_csv;
  double memory_limit_gb = 0;
  int ranks_per_node = 0;
};

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
      sub.add_option("--points-csv", a->points_csv,
                     "write the design points (point, design, role, seed_point, parameters...) to this CSV file");
      return [a]() {
        const auto c = campaign::Campaign::load(a->campaign_file);
        campaign::PlanOptions opt;
        opt.memory_limit_gb = a->memory_limit_gb;
        opt.ranks_per_node = a->ranks_per_node > 0 ? a->ranks_per_node : ranks_on_this_node();
        const auto report = campaign::plan(c, opt);
        if (world_rank() != 0) return report.problems.empty() ? 0 : 2;
        if (!a->points_csv.empty()) {
          std::ofstream out(a->points_csv);
          if (!out) throw IoError("--points-csv " + a->points_csv + ": cannot be written");
          out << campaign::points_csv(c);
          if (!out.flush()) throw IoError("--points-csv " + a->points_csv + ": write failed");
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
        std::cout << "plan: OK, " << c.entries().size() << " entries\n";
        return 0;
      };
    });

}  // namespace
}  // namespace spinflip::cli
