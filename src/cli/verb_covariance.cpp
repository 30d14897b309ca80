// spinflip covariance CATALOGUE --select … -o cov.h5
#include "analysis/cli_options.hpp"
#include "cli/verbs.hpp"

namespace spinflip::cli {
namespace {
RegisterVerb covariance_verb(
    "covariance", "mean, covariance, correlation and Hartlap-corrected inverse from the fiducial realisations", 60,
    [](CLI::App& sub) -> VerbRun {
      auto o = std::make_shared<analysis::CovarianceOptions>();
      auto c = std::make_shared<analysis::CliCommon>();
      o->output = "covariance.h5";
      analysis::add_common_options(sub, *o, *c);
      sub.add_option("-o,--output", o->output, "the HDF5 file written (default: covariance.h5; a picture "
                     "<output>_corr.png beside it unless --no-plot)");
      sub.add_flag("--shrink", o->shrink, "Ledoit-Wolf (2004) shrinkage towards a scaled identity");
      return [=]() {
        if (world_rank() != 0) return 0;  // serial analysis: rank 0 does it
        analysis::finish_common(*o, *c);
        analysis::run_covariance(*o);
        return 0;
      };
    });
}  // namespace
}  // namespace spinflip::cli
