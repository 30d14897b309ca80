// spinflip plot CATALOGUE [--select …] [--against z|coefficient] [--by PARAM | --fiducial] -o out.png
#include <cmath>
#include <memory>

#include "analysis/analysis.hpp"
#include "cli/verbs.hpp"

namespace spinflip::cli {
namespace {
RegisterVerb plot_verb(
    "plot", "draw a statistic against redshift (or k / j) across the design or the fiducial realisations", 64,
    [](CLI::App& sub) -> VerbRun {
      auto o = std::make_shared<analysis::PlotOptions>();
      auto at_z = std::make_shared<double>(NAN);
      auto point = std::make_shared<std::int64_t>(-1);
      sub.add_option("catalogue", o->catalogue, "catalogue.h5 written by spinflip run")->required();
      sub.add_option("-s,--select", o->selects,
                     "which coefficients, in the analysis verbs' language (docs/analysis.md); default: "
                     "'kernel=power;quantity=1' (Δ² of every k bin)")
          ->allow_extra_args(false);
      sub.add_option("--against", o->against, "x axis: z (redshift, frequency on top) or coefficient (k or j at one z)")
          ->capture_default_str();
      sub.add_option("--at-z", *at_z, "with --against coefficient: the redshift (nearest unit; default: the middle)");
      sub.add_option("--by", o->by, "parameter that colours the design points (default: the first)");
      sub.add_flag("--fiducial", o->fiducial, "the fiducial point's mean with a ±1σ band instead of the design points");
      sub.add_option("--role", o->roles, "design roles to draw (default: training list)")->capture_default_str();
      sub.add_option("--point", *point, "fiducial design point, when the design has several");
      sub.add_option("--format", o->format, "png or pdf (default: from the output's extension, else png)");
      sub.add_option("--data", o->data_output, "also keep the plotted numbers in this HDF5 file (docs/analysis.md)");
      sub.add_flag("--allow-incomplete", o->allow_incomplete, "use the done entries even if some are still pending");
      sub.add_option("-o,--output", o->output, "picture to write (atomically: drawn beside it, then renamed)")
          ->capture_default_str();
      return [=]() {
        if (world_rank() != 0) return 0;
        if (std::isfinite(*at_z)) o->at_z = *at_z;
        if (*point >= 0) o->point = *point;
        analysis::run_statistic_plot(*o);
        return 0;
      };
    });
}  // namespace
}  // namespace spinflip::cli
