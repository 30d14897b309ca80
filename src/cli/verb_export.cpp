// spinflip export CATALOGUE --select … -o train.h5
#include "analysis/cli_options.hpp"
#include "cli/verbs.hpp"

namespace spinflip::cli {
namespace {
RegisterVerb export_verb(
    "export", "training set: parameters, data vectors, normalisation, train/validation/test split by design point", 62,
    [](CLI::App& sub) -> VerbRun {
      auto o = std::make_shared<analysis::ExportOptions>();
      auto c = std::make_shared<analysis::CliCommon>();
      auto step = std::make_shared<std::int64_t>(-1);
      o->output = "train.h5";
      analysis::add_common_options(sub, *o, *c, false);
      sub.add_option("-o,--output", o->output, "the HDF5 training set written (default: train.h5)");
      sub.add_option("--roles", o->roles, "design roles to export (training, list, fiducial, stencil+, stencil-, all)")
          ->delimiter(',')
          ->capture_default_str();
      sub.add_option("--split", o->fractions, "train,validation,test fractions of the design points")
          ->delimiter(',')
          ->expected(3)
          ->capture_default_str();
      sub.add_option("--seed", o->seed, "seed of the split shuffle")->capture_default_str();
      sub.add_flag("--score", o->score, "add score-compressed data (one number per parameter) from the stencil");
      sub.add_option("--step-index", *step, "stencil step size for --score (default: the first)");
      return [=]() {
        if (world_rank() != 0) return 0;
        analysis::finish_common(*o, *c);
        if (*step >= 0) o->step_index = *step;
        analysis::run_export(*o);
        return 0;
      };
    });
}  // namespace
}  // namespace spinflip::cli
