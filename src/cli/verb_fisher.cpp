// spinflip fisher CATALOGUE --select … [--select …] -o fisher.h5
#include "analysis/cli_options.hpp"
#include "cli/verbs.hpp"

namespace spinflip::cli {
namespace {
RegisterVerb fisher_verb(
    "fisher", "Fisher forecast from the stencil and fiducial entries; compares selections side by side", 61,
    [](CLI::App& sub) -> VerbRun {
      auto o = std::make_shared<analysis::FisherOptions>();
      auto c = std::make_shared<analysis::CliCommon>();
      auto step = std::make_shared<std::int64_t>(-1);
      o->output = "fisher.h5";
      analysis::add_common_options(sub, *o, *c);
      sub.add_option("-o,--output", o->output, "the HDF5 file written (default: fisher.h5; a picture "
                     "<output>_corner.png beside it unless --no-plot)");
      sub.add_option("--step-index", *step, "which stencil step size to use (default: the first)");
      sub.add_option("--tolerance", o->tolerance, "flag a convergence check that moves a 1-sigma error by more than this fraction")
          ->capture_default_str();
      sub.add_flag("--combined", o->combined, "also the Coulton & Wandelt (2023) combined estimator");
      sub.add_option("--covariance", o->covariance_file,
                     "take C from a `spinflip covariance` output (same selection names) or a file with a /cov dataset");
      sub.add_flag("--shrink", o->shrink, "Ledoit-Wolf (2004) shrunk covariance (no Hartlap factor)");
      return [=]() {
        if (world_rank() != 0) return 0;
        analysis::finish_common(*o, *c);
        if (*step >= 0) o->step_index = *step;
        analysis::run_fisher(*o);
        return 0;
      };
    });
}  // namespace
}  // namespace spinflip::cli
