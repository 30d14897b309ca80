// The options every analysis verb shares, for src/cli/verb_{covariance,fisher,export}.cpp.
// Header-only and used by the CLI alone, so the library never depends on CLI11.
#pragma once
#include <CLI/CLI.hpp>

#include <memory>

#include "analysis/analysis.hpp"

namespace spinflip::analysis {

struct CliCommon {
  std::string transform = "none";
  std::int64_t point = -1;
};

inline void add_common_options(CLI::App& sub, CommonOptions& o, CliCommon& c, bool with_plot = true) {
  sub.add_option("catalogue", o.catalogue, "catalogue.h5 written by spinflip run")->required();
  sub.add_option("-s,--select", o.selects,
                 "coefficient selection, e.g. 'name=ps;kernel=power;freq=140:180;every=2' (repeat to compare; "
                 "see docs/analysis.md)")
      ->allow_extra_args(false);
  sub.add_option("--transform", c.transform, "coefficient transform: none, log or standardise");
  sub.add_flag("--allow-incomplete", o.allow_incomplete, "use the done entries even if some are still pending");
  sub.add_option("--point", c.point, "fiducial design point, when the design has several");
  if (with_plot) {
    // A callback flag, so the help shows no CLI11 default text ("{false}").
    sub.add_flag_callback("--no-plot", [&o] { o.plot = false; }, "do not draw the picture (PNG)");
    sub.add_option("--plot", o.plot_path,
                   "where to write the picture (default: the output's name with _corr.png or _corner.png)");
  }
}

inline void finish_common(CommonOptions& o, const CliCommon& c) {
  o.transform = parse_transform(c.transform);
  if (c.point >= 0) o.point = c.point;
}

}  // namespace spinflip::analysis
