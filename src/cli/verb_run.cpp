// spinflip run CAMPAIGN [-o CATALOGUE] [--group-size G] [--retry-failed]: the
// campaign's task farm under mpirun/srun (campaign/driver.hpp, docs/driver.md).
// Resumes an existing catalogue of the same campaign. Exits 0 when the work
// list is done (or --max-entries reached), 3 when SIGINT/SIGTERM/SIGUSR1
// stopped it early (the catalogue is whole and resumable), 2 on a user error.
#ifdef SPINFLIP_HAVE_DRIVER
#include <memory>
#include <optional>

#include "campaign/campaign.hpp"
#include "campaign/driver.hpp"
#include "cli/verbs.hpp"

namespace spinflip::cli {
namespace {

struct RunArgs {
  std::string campaign_file, output;
  int group_size = 0;
  bool retry_failed = false;
  double memory_limit_gb = 0;
  std::size_t max_entries = 0;
};

RegisterVerb run_verb(
    "run", "run (or resume) a campaign into its catalogue, under mpirun/srun", 20, [](CLI::App& sub) -> VerbRun {
      auto a = std::make_shared<RunArgs>();
      sub.add_option("campaign", a->campaign_file, "campaign file (TOML)")->required();
      sub.add_option("-o,--output", a->output,
                     "the catalogue written or resumed (default: the campaign's campaign.output); also writes "
                     "<catalogue>.progress.json and <catalogue>.lock beside it");
      sub.add_option("--group-size", a->group_size,
                     "ranks sharing one light cone (default: campaign.group_size); must divide the rank count")
          ->check(CLI::PositiveNumber);
      sub.add_flag("--retry-failed", a->retry_failed, "run entries marked failed again, besides pending ones");
      sub.add_option("--memory-limit-gb", a->memory_limit_gb,
                     "per-rank memory limit in GB (default: campaign.memory_limit_gb, else the node's share)")
          ->check(CLI::PositiveNumber);
      sub.add_option("--max-entries", a->max_entries,
                     "stop cleanly after this many entries (the catalogue stays resumable)")
          ->check(CLI::PositiveNumber);
      return [a]() {
        const auto c = campaign::Campaign::load(a->campaign_file);
        campaign::RunOptions opt;
        opt.output = a->output;
        if (a->group_size > 0) opt.group_size = a->group_size;
        opt.retry_failed = a->retry_failed;
        opt.memory_limit_gb = a->memory_limit_gb;
        opt.max_entries = a->max_entries;
        const campaign::RunResult r = campaign::run(c, opt, MPI_COMM_WORLD);
        return r.stopped_early && r.signal != 0 ? campaign::exit_stopped : 0;
      };
    });

}  // namespace
}  // namespace spinflip::cli
#endif
