// spinflip export: a training set for emulators and inference networks —
// parameters (physical and unit cube), data vectors, normalisation, a split by
// design point, the selection record and the catalogue's provenance.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <map>
#include <numeric>

#include "analysis/estimators.hpp"
#include "analysis/internal.hpp"
#include "core/errors.hpp"
#include "core/log.hpp"
#include "core/output_file.hpp"

namespace spinflip::analysis {

void run_export(const ExportOptions& o) {
  if (o.fractions.size() != 3 || std::any_of(o.fractions.begin(), o.fractions.end(), [](double f) { return !(f >= 0); }) ||
      std::accumulate(o.fractions.begin(), o.fractions.end(), 0.0) <= 0)
    throw InputError("--split needs three fractions ≥ 0 (train,validation,test) with a positive sum, e.g. 0.8,0.1,0.1");
  Catalogue cat(o.catalogue);
  auto sels = detail::selections(cat, o.selects);
  const Design& des = cat.design();
  const std::vector<std::string> known = {"training", "fiducial", "stencil+", "stencil-", "list"};
  std::vector<std::string> roles = o.roles;
  if (roles.size() == 1 && roles[0] == "all") roles = known;
  for (const auto& r : roles)
    if (std::find(known.begin(), known.end(), r) == known.end())
      throw InputError("--roles: unknown role '" + r + "' (allowed: training, fiducial, stencil+, stencil-, list, all)");

  // Entries: done ones at points of the chosen roles, point-major.
  std::vector<std::size_t> entries;
  std::vector<std::int64_t> points;
  for (std::size_t pt = 0; pt < des.role.size(); ++pt) {
    if (std::find(roles.begin(), roles.end(), des.role[pt]) == roles.end()) continue;
    const auto e = detail::done_entries(cat, static_cast<std::int64_t>(pt), o.allow_incomplete,
                                        "a " + des.role[pt] + " point");
    if (e.empty()) continue;
    points.push_back(static_cast<std::int64_t>(pt));
    entries.insert(entries.end(), e.begin(), e.end());
  }
  if (entries.empty()) {
    std::string list;
    for (const auto& r : roles) list += (list.empty() ? "" : ",") + r;
    throw InputError(cat.path() + ": no done entries at design points with role " + list +
                     " (choose others with --roles)");
  }
  const auto split_of_point = split_points(points, o.fractions, o.seed);
  std::map<std::int64_t, int> split_map;
  for (std::size_t k = 0; k < points.size(); ++k) split_map[points[k]] = split_of_point[k];

  const std::size_t n = entries.size(), np = des.names.size();
  std::vector<double> phys(n * np), unit(n * np);
  std::vector<std::int64_t> e_idx, e_point, e_real, e_split;
  for (std::size_t r = 0; r < n; ++r) {
    const std::size_t e = entries[r];
    const auto pt = cat.entry_point()[e];
    e_idx.push_back(static_cast<std::int64_t>(e));
    e_point.push_back(pt);
    e_real.push_back(cat.entry_realisation()[e]);
    e_split.push_back(split_map[pt]);
    for (std::size_t i = 0; i < np; ++i) {
      const double v = des.points(pt, static_cast<Eigen::Index>(i));
      phys[r * np + i] = v;
      unit[r * np + i] = to_unit(v, des.min[static_cast<Eigen::Index>(i)], des.max[static_cast<Eigen::Index>(i)], des.log[i] != 0);
    }
  }

  core::OutputFile target(o.output);  // written whole or not at all
  h5::Id out = h5::create_memory_file();
  detail::write_output_header(out.get(), cat, "training-set");
  h5::write_attr(out.get(), "split_fractions", o.fractions);
  h5::write_attr(out.get(), "split_seed", static_cast<std::int64_t>(o.seed));
  h5::write_attr(out.get(), "split_names", std::vector<std::string>{"train", "validation", "test"});
  h5::write_attr(out.get(), "roles", roles);
  {
    h5::Id g = h5::create_group(out.get(), "params");
    h5::write_strings(g.get(), "names", des.names);
    h5::write_strings(g.get(), "units", des.units);
    std::vector<std::int64_t> lg(des.log.begin(), des.log.end());
    h5::write_ints(g.get(), "log", lg, {np});
    h5::write_doubles(g.get(), "min", detail::flat(des.min), {np});
    h5::write_doubles(g.get(), "max", detail::flat(des.max), {np});
    h5::write_doubles(g.get(), "physical", phys, {n, np});
    h5::write_doubles(g.get(), "unit_cube", unit, {n, np});
    h5::write_attr(g.get(), "unit_cube",
                   std::string("u = (v - min)/(max - min), in log10 space where log = 1: u = (log10 v - log10 min)/(log10 max - log10 min)"));
  }
  h5::write_ints(out.get(), "entry", e_idx, {n});
  h5::write_ints(out.get(), "point", e_point, {n});
  h5::write_ints(out.get(), "realisation", e_real, {n});
  h5::write_ints(out.get(), "split", e_split, {n});

  std::optional<detail::Stencil> st;
  if (o.score) st = detail::stencil(cat, o.point, o.step_index, o.allow_incomplete);
  std::vector<std::string> names;
  std::size_t counts[3] = {0, 0, 0};
  for (auto s : e_split) ++counts[s];
  for (auto& sel : sels) {
    Eigen::MatrixXd X = cat.load(sel, entries);
    detail::drop_degenerate(cat, sel, X, {}, false, "exported entry");  // bins without a kept mode
    if (X.hasNaN()) {
      // Name the first NaN cell and its cause in the kernel's terms.
      Eigen::Index r0 = -1, c0 = -1, n_cols = 0;
      for (Eigen::Index c = 0; c < X.cols(); ++c) {
        if (!X.col(c).hasNaN()) continue;
        ++n_cols;
        if (c0 < 0) {
          c0 = c;
          for (r0 = 0; !std::isnan(X(r0, c)); ++r0) {
          }
        }
      }
      throw InputError("--select '" + sel.text + "': " + std::to_string(n_cols) + " exported coefficients are NaN, first " +
                       detail::cell_namer(cat, sel, entries)(r0, c0) + ", because it is " +
                       detail::nan_cause(cat, sel, c0) +
                       "; exclude such coefficients with an axis filter (e.g. n_modes=1: for power, or another "
                       "kernel=) or leave out the entries");
    }
    detail::Transformer tr{o.transform, {}, {}};
    if (o.transform == Transform::standardise) {
      tr.kind = Transform::none;  // standardisation is the per-coefficient normalisation below
    }
    tr.apply(X, "selection '" + sel.name + "'", detail::cell_namer(cat, sel, entries));
    // Normalisation from the training split only, so validation and test
    // stay unseen; constant coefficients keep scale 1.
    Eigen::VectorXd mean = Eigen::VectorXd::Zero(X.cols()), sd = Eigen::VectorXd::Ones(X.cols());
    std::vector<Eigen::Index> train;
    for (std::size_t r = 0; r < n; ++r)
      if (e_split[r] == 0) train.push_back(static_cast<Eigen::Index>(r));
    if (train.size() >= 2) {
      Eigen::MatrixXd T(static_cast<Eigen::Index>(train.size()), X.cols());
      for (std::size_t k = 0; k < train.size(); ++k) T.row(static_cast<Eigen::Index>(k)) = X.row(train[k]);
      const auto mc = mean_cov(T);
      mean = mc.mean;
      sd = mc.cov.diagonal().array().sqrt();
      for (Eigen::Index c = 0; c < sd.size(); ++c)
        if (!(sd[c] > 0)) sd[c] = 1.0;
    } else {
      log::warn("selection '{}': fewer than 2 training entries; normalisation left as mean 0, scale 1", sel.name);
    }
    const Eigen::MatrixXd Z = ((X.rowwise() - mean.transpose()).array().rowwise() / sd.transpose().array()).matrix();
    const std::size_t d = static_cast<std::size_t>(X.cols());
    h5::Id g = h5::create_group(out.get(), sel.name);
    h5::write_doubles(g.get(), "data", detail::flat(X), {n, d});
    h5::write_doubles(g.get(), "data_normalised", detail::flat(Z), {n, d});
    h5::write_doubles(g.get(), "norm_mean", detail::flat(mean), {d});
    h5::write_doubles(g.get(), "norm_std", detail::flat(sd), {d});
    h5::write_attr(g.get(), "normalisation", std::string("data_normalised = (data - norm_mean) / norm_std, from the train split"));
    h5::write_attr(g.get(), "transform", o.transform == Transform::log ? tr.describe() : std::string("none"));
    detail::write_selection(g.get(), cat, sel);
    if (st) {
      // Score compression (Heavens, Jimenez & Lahav 2000; the linear score
      // t = ∂μᵀ C⁻¹ (x − μ)): one number per parameter, plus the
      // quasi-maximum-likelihood θ̂ = θ_fid + F⁻¹ t.
      auto m = detail::fisher_model(cat, sel, *st, o.transform == Transform::log ? Transform::log : Transform::none, false);
      Eigen::MatrixXd Xs = cat.load(m.selection, entries);
      m.transform.apply(Xs, "selection '" + sel.name + "'", detail::cell_namer(cat, m.selection, entries));
      const Eigen::MatrixXd t = (Xs.rowwise() - m.mean.transpose()) * m.precision * m.derivatives;
      const Eigen::MatrixXd Finv = spd_inverse(m.fisher, "the Fisher matrix");
      Eigen::VectorXd fid(static_cast<Eigen::Index>(st->params.size()));
      std::vector<std::string> pn;
      for (std::size_t j = 0; j < st->params.size(); ++j) {
        const auto i = st->params[j];
        const double v = des.points(st->fiducial, static_cast<Eigen::Index>(i));
        fid[static_cast<Eigen::Index>(j)] = des.log[i] ? std::log10(v) : v;
        pn.push_back(detail::fisher_param_name(des, i));
      }
      const Eigen::MatrixXd theta = (t * Finv).rowwise() + fid.transpose();
      h5::Id sg = h5::create_group(g.get(), "score");
      const std::size_t q = st->params.size();
      h5::write_doubles(sg.get(), "t", detail::flat(t), {n, q});
      h5::write_doubles(sg.get(), "theta_mle", detail::flat(theta), {n, q});
      h5::write_doubles(sg.get(), "fisher", detail::flat(m.fisher), {q, q});
      h5::write_attr(sg.get(), "param_names", pn);
      h5::write_attr(sg.get(), "n_data_used", static_cast<std::int64_t>(m.selection.elements.size()));
    }
    names.push_back(sel.name);
    std::printf("%s", selection_record(cat, sel).c_str());
  }
  h5::write_attr(out.get(), "selections", names);
  h5::save_file(out, target);
  std::printf("exported %zu entries from %zu design points: train %zu, validation %zu, test %zu entries\nwrote %s\n", n,
              points.size(), counts[0], counts[1], counts[2], o.output.c_str());
}

}  // namespace spinflip::analysis
