// spinflip covariance: mean, covariance, correlation and the de-biased inverse
// of each selection's data vector over the fiducial realisations.
#include <algorithm>
#include <cstdio>
#include <iostream>

#include "analysis/estimators.hpp"
#include "analysis/internal.hpp"
#include "core/errors.hpp"
#include "core/log.hpp"
#include "core/output_file.hpp"

namespace spinflip::analysis {
using detail::flat;

void run_covariance(const CovarianceOptions& o) {
  Catalogue cat(o.catalogue);
  auto sels = detail::selections(cat, o.selects);
  const std::int64_t fid = detail::fiducial_point(cat, o.point);
  const auto entries = detail::done_entries(cat, fid, o.allow_incomplete, "the fiducial point");
  if (entries.size() < 2)
    throw InputError(cat.path() + ": fiducial point " + std::to_string(fid) + " has " + std::to_string(entries.size()) +
                     " done realisations; a covariance needs at least 2");
  core::OutputFile target(o.output);  // written whole or not at all
  h5::Id out = h5::create_memory_file();
  detail::write_output_header(out.get(), cat, "covariance");
  h5::write_attr(out.get(), "fiducial_point", fid);
  std::vector<std::string> names;
  for (auto& sel : sels) {
    Eigen::MatrixXd X = cat.load(sel, entries);
    detail::drop_degenerate(cat, sel, X, {});
    detail::Transformer tr{o.transform, {}, {}};
    tr.fit(X);
    tr.apply(X, "selection '" + sel.name + "'", detail::cell_namer(cat, sel, entries));
    const std::size_t n = static_cast<std::size_t>(X.rows()), p = static_cast<std::size_t>(X.cols());
    const auto mc = mean_cov(X);
    Eigen::MatrixXd cov = mc.cov;
    double intensity = 0;
    if (o.shrink) {
      const auto lw = ledoit_wolf(X);
      cov = lw.cov;
      intensity = lw.intensity;
    }
    const auto conditioning = detail::conditioning(cat, sel, cov, n);
    detail::check_conditioning(conditioning, sel.name);
    const double cond = conditioning.covariance;
    // The Hartlap factor de-biases the inverse of a plain sample covariance
    // only; a shrunk estimate is not Wishart, so no factor is applied to it.
    const double hartlap = o.shrink ? 1.0 : hartlap_factor(n, p);
    h5::Id g = h5::create_group(out.get(), sel.name);
    h5::write_doubles(g.get(), "mean", flat(mc.mean), {p});
    h5::write_doubles(g.get(), "cov", flat(cov), {p, p});
    h5::write_doubles(g.get(), "sample_cov", flat(mc.cov), {p, p});
    h5::write_doubles(g.get(), "corr", flat(correlation(cov)), {p, p});
    h5::write_doubles(g.get(), "std", flat(Eigen::VectorXd(cov.diagonal().array().sqrt())), {p});
    std::vector<std::int64_t> ent(entries.begin(), entries.end()), real;
    for (auto e : entries) real.push_back(cat.entry_realisation()[e]);
    h5::write_ints(g.get(), "entries", ent, {n});
    h5::write_ints(g.get(), "realisations", real, {n});
    h5::write_attr(g.get(), "n_realisations", static_cast<std::int64_t>(n));
    h5::write_attr(g.get(), "n_data", static_cast<std::int64_t>(p));
    h5::write_attr(g.get(), "condition_number", cond);
    h5::write_attr(g.get(), "correlation_condition_number", conditioning.correlation);
    h5::write_attr(g.get(), "hartlap_factor", std::max(0.0, o.shrink ? hartlap_factor(n, p) : hartlap));
    h5::write_attr(g.get(), "hartlap_applied", static_cast<std::int64_t>(!o.shrink));
    h5::write_attr(g.get(), "shrinkage", std::string(o.shrink ? "ledoit-wolf-2004" : "none"));
    h5::write_attr(g.get(), "shrinkage_intensity", intensity);
    h5::write_attr(g.get(), "transform", tr.describe());
    bool have_precision = false;
    if (o.shrink || n >= p + 3) {
      try {
        h5::write_doubles(g.get(), "precision", flat(Eigen::MatrixXd(hartlap * spd_inverse(cov, "the covariance"))),
                          {p, p});
        have_precision = true;
      } catch (const InputError& e) {
        log::warn("selection '{}': no precision matrix written: {}", sel.name, e.what());
      }
    } else {
      log::warn("selection '{}': {} realisations for {} coefficients: no precision matrix (needs n >= p + 3 = {})",
                sel.name, n, p, p + 3);
    }
    detail::write_selection(g.get(), cat, sel);
    names.push_back(sel.name);
    std::printf("%s", selection_record(cat, sel).c_str());
    // A Hartlap factor ≤ 0 (n ≤ p + 2) means no unbiased inverse exists: say so, never print it.
    const double hf = hartlap_factor(n, p);
    char hartlap_text[96];
    if (hf > 0) std::snprintf(hartlap_text, sizeof hartlap_text, "%.4f", hf);
    else std::snprintf(hartlap_text, sizeof hartlap_text, "undefined (needs n >= p + 3 = %zu)", p + 3);
    std::printf("  realisations %zu, condition number %.4g (of the correlation matrix), Hartlap factor %s%s%s\n", n,
                conditioning.correlation, hartlap_text, o.shrink ? " (not applied: shrunk)" : "",
                have_precision ? "" : " — precision not written");
    if (o.shrink) std::printf("  Ledoit-Wolf shrinkage intensity %.4f\n", intensity);
  }
  h5::write_attr(out.get(), "selections", names);
  h5::save_file(out, target);  // the plot script reads the written file
  std::printf("wrote %s\n", o.output.c_str());
  std::fflush(stdout);
  if (o.plot) {
    const std::string png = o.plot_path.empty() ? detail::derived_png(o.output, "_corr") : o.plot_path;
    if (detail::run_plot("plot_correlation.py", {o.output, png})) std::printf("wrote %s\n", png.c_str());
  }
}

}  // namespace spinflip::analysis
