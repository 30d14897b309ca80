// spinflip fisher: central-difference derivatives of realisation-matched means,
// F = ∂μᵀ C⁻¹ ∂μ with the Hartlap factor, convergence checks, comparison table.
#include <algorithm>
#include <cmath>
#include <limits>
#include <cstdio>
#include <map>
#include <set>
#include <sstream>
#include <tuple>

#include "analysis/estimators.hpp"
#include "analysis/internal.hpp"
#include "core/errors.hpp"
#include "core/log.hpp"
#include "core/output_file.hpp"

namespace spinflip::analysis {
namespace detail {

const StencilPair* Stencil::find(std::size_t param, std::int64_t step) const {
  for (const auto& p : pairs)
    if (p.param == param && p.step_index == step) return &p;
  return nullptr;
}

std::vector<std::int64_t> Stencil::step_indices() const {
  std::set<std::int64_t> s;
  for (const auto& p : pairs) s.insert(p.step_index);
  return {s.begin(), s.end()};
}

std::string fisher_param_name(const Design& d, std::size_t i) {
  return d.log[i] ? "log10(" + d.names[i] + ")" : d.names[i];
}

Stencil stencil(const Catalogue& cat, std::optional<std::int64_t> point, std::optional<std::int64_t> step_index,
                bool allow_incomplete) {
  const Design& d = cat.design();
  Stencil st;
  st.fiducial = fiducial_point(cat, point);
  st.fiducial_entries = done_entries(cat, st.fiducial, allow_incomplete, "the fiducial point");
  // (param, step) → (plus point, minus point)
  std::map<std::pair<std::size_t, std::int64_t>, std::pair<std::int64_t, std::int64_t>> found;
  for (std::size_t i = 0; i < d.role.size(); ++i) {
    const bool plus = d.role[i] == "stencil+", minus = d.role[i] == "stencil-";
    if (!plus && !minus) continue;
    if (d.seed_point[i] != st.fiducial) continue;  // a stencil around another fiducial
    if (d.stencil_param[i] < 0 || d.stencil_param[i] >= static_cast<std::int64_t>(d.names.size()))
      throw InputError(cat.path() + ": /design/stencil_param[" + std::to_string(i) + "] = " +
                       std::to_string(d.stencil_param[i]) + " is not a parameter index");
    auto& slot = found[{static_cast<std::size_t>(d.stencil_param[i]), d.stencil_step_index[i]}];
    if (slot == std::pair<std::int64_t, std::int64_t>{}) slot = {-1, -1};
    (plus ? slot.first : slot.second) = static_cast<std::int64_t>(i);
  }
  if (found.empty())
    throw InputError(cat.path() + ": no stencil+/stencil- design points around fiducial point " +
                     std::to_string(st.fiducial) + ", so there are no derivatives for a Fisher forecast");
  const auto& real = cat.entry_realisation();
  for (const auto& [key, pm] : found) {
    const auto [param, step] = key;
    if (pm.first < 0 || pm.second < 0)
      throw InputError(cat.path() + ": parameter '" + d.names[param] + "' step index " + std::to_string(step) +
                       " has a stencil" + (pm.first < 0 ? "-" : "+") + " point but no stencil" +
                       (pm.first < 0 ? "+" : "-") + " point; central differences need both");
    StencilPair p;
    p.param = param;
    p.step_index = step;
    p.plus = pm.first;
    p.minus = pm.second;
    auto coord = [&](std::int64_t pt) {
      const double v = d.points(pt, static_cast<Eigen::Index>(param));
      return d.log[param] ? std::log10(v) : v;
    };
    p.delta = coord(p.plus) - coord(p.minus);
    if (!(p.delta > 0))
      throw InputError(cat.path() + ": stencil points " + std::to_string(p.plus) + " (+) and " +
                       std::to_string(p.minus) + " (-) of '" + d.names[param] + "' do not bracket the fiducial");
    const auto ep = done_entries(cat, p.plus, allow_incomplete, "stencil+ of " + d.names[param]);
    const auto em = done_entries(cat, p.minus, allow_incomplete, "stencil- of " + d.names[param]);
    std::map<std::int64_t, std::size_t> by_real;
    for (auto e : em) by_real[real[e]] = e;
    for (auto e : ep)
      if (auto it = by_real.find(real[e]); it != by_real.end()) {
        p.plus_entries.push_back(e);
        p.minus_entries.push_back(it->second);
      }
    if (p.plus_entries.empty())
      throw InputError(cat.path() + ": stencil of '" + d.names[param] + "' step index " + std::to_string(step) +
                       " has no realisation done at both the + and - point");
    st.pairs.push_back(std::move(p));
  }
  const auto steps = st.step_indices();
  st.step_index = step_index ? *step_index : steps.front();
  if (std::find(steps.begin(), steps.end(), st.step_index) == steps.end()) {
    std::string list;
    for (auto s : steps) list += (list.empty() ? "" : ", ") + std::to_string(s);
    throw InputError("--step-index " + std::to_string(st.step_index) + " is not in " + cat.path() +
                     " (step indices: " + list + ")");
  }
  for (std::size_t i = 0; i < d.names.size(); ++i) {
    if (st.find(i, st.step_index)) st.params.push_back(i);
    else log::warn("parameter '{}' has no stencil at step index {}: left out of the Fisher matrix", d.names[i],
                   st.step_index);
  }
  return st;
}

namespace {
/// C (and the factor for its inverse) from a covariance file, checked against the selection.
std::pair<Eigen::MatrixXd, double> external_covariance(const Catalogue& cat, const Selection& sel,
                                                       const std::string& transform, const std::string& path) {
  h5::Id f = h5::open_read(path);
  const bool grouped = h5::exists(f.get(), sel.name + "/cov");
  if (!grouped && !h5::exists(f.get(), "cov"))
    throw InputError("--covariance " + path + ": no dataset '" + sel.name + "/cov' or '/cov' for selection '" +
                     sel.name + "'");
  h5::Id g(grouped ? H5Gopen2(f.get(), sel.name.c_str(), H5P_DEFAULT) : H5Gopen2(f.get(), "/", H5P_DEFAULT));
  const auto v = h5::read_doubles(g.get(), "cov", path);
  const std::size_t d = sel.elements.size();
  if (v.size() != d * d)
    throw InputError("--covariance " + path + ": cov has " + std::to_string(v.size()) + " values, selection '" +
                     sel.name + "' needs " + std::to_string(d) + " x " + std::to_string(d));
  if (h5::exists(g.get(), "selection/unit")) {
    const auto unit = h5::read_ints(g.get(), "selection/unit", path);
    const auto coeff = h5::read_ints(g.get(), "selection/coeff", path);
    const auto scen = h5::read_strings(g.get(), "selection/scenario", path);
    const auto kern = h5::read_strings(g.get(), "selection/kernel", path);
    for (std::size_t k = 0; k < d; ++k) {
      const auto& el = sel.elements[k];
      const auto& b = cat.blocks()[el.block];
      if (unit[k] != static_cast<std::int64_t>(el.unit) || coeff[k] != static_cast<std::int64_t>(el.coeff) ||
          scen[k] != b.scenario || kern[k] != b.kernel)
        throw InputError("--covariance " + path + ": group '" + sel.name +
                         "' was made from a different selection (element " + std::to_string(k) + " differs)");
    }
  }
  const std::string tr = h5::attr_text(g.get(), "transform");
  if (!tr.empty() && tr != transform)
    throw InputError("--covariance " + path + ": made with transform '" + tr + "', this forecast uses '" + transform + "'");
  double factor = 1.0;
  if (h5::attr_text(g.get(), "hartlap_applied") == "1") factor = std::stod(h5::attr_text(g.get(), "hartlap_factor"));
  Eigen::MatrixXd C = Eigen::Map<const Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>>(
      v.data(), static_cast<Eigen::Index>(d), static_cast<Eigen::Index>(d));
  return {C, factor};
}
}  // namespace

FisherModel fisher_model(const Catalogue& cat, const Selection& sel_in, const Stencil& st, Transform transform,
                         bool shrink, const std::string& covariance_file) {
  FisherModel m;
  m.selection = sel_in;
  m.fiducial = cat.load(m.selection, st.fiducial_entries);
  std::vector<Eigen::MatrixXd> plus, minus;
  for (const auto& p : st.pairs) {
    plus.push_back(cat.load(m.selection, p.plus_entries));
    minus.push_back(cat.load(m.selection, p.minus_entries));
  }
  std::vector<Eigen::MatrixXd*> others;
  for (auto& x : plus) others.push_back(&x);
  for (auto& x : minus) others.push_back(&x);
  drop_degenerate(cat, m.selection, m.fiducial, others);
  m.transform.kind = transform;
  m.transform.fit(m.fiducial);
  const std::string what = "selection '" + m.selection.name + "'";
  m.transform.apply(m.fiducial, what, cell_namer(cat, m.selection, st.fiducial_entries));
  for (std::size_t k = 0; k < st.pairs.size(); ++k) {
    m.transform.apply(plus[k], what, cell_namer(cat, m.selection, st.pairs[k].plus_entries));
    m.transform.apply(minus[k], what, cell_namer(cat, m.selection, st.pairs[k].minus_entries));
    m.diff.push_back((plus[k] - minus[k]) / st.pairs[k].delta);
  }
  const std::size_t n = static_cast<std::size_t>(m.fiducial.rows()), d = static_cast<std::size_t>(m.fiducial.cols());
  if (covariance_file.empty()) {
    require_realisations(n, d, m.selection.name, shrink);
    const auto mc = mean_cov(m.fiducial);
    m.mean = mc.mean;
    m.cov = shrink ? ledoit_wolf(m.fiducial).cov : mc.cov;
    m.hartlap = shrink ? 1.0 : hartlap_factor(n, d);
  } else {
    m.mean = m.fiducial.colwise().mean().transpose();
    std::tie(m.cov, m.hartlap) = external_covariance(cat, m.selection, m.transform.describe(), covariance_file);
  }
  m.conditioning = conditioning(cat, m.selection, m.cov, n);
  check_conditioning(m.conditioning, m.selection.name);
  m.precision = m.hartlap * spd_inverse(m.cov, "the covariance of " + what);
  m.derivatives.resize(static_cast<Eigen::Index>(d), static_cast<Eigen::Index>(st.params.size()));
  for (std::size_t j = 0; j < st.params.size(); ++j) {
    const auto* p = st.find(st.params[j], st.step_index);
    const auto k = static_cast<std::size_t>(p - st.pairs.data());
    m.derivatives.col(static_cast<Eigen::Index>(j)) = m.diff[k].colwise().mean().transpose();
  }
  m.fisher = fisher_matrix(m.derivatives, m.precision);
  return m;
}

}  // namespace detail

namespace {
using detail::flat;

struct Check {
  std::string label;
  Eigen::VectorXd sigma;
};

/// σ of a convergence variant, or NaN when that variant's Fisher matrix is singular.
Eigen::VectorXd variant_sigma(const Eigen::MatrixXd& D, const Eigen::MatrixXd& P) {
  try {
    return marginal_errors(fisher_matrix(D, P));
  } catch (const InputError&) {
    return Eigen::VectorXd::Constant(D.cols(), std::numeric_limits<double>::quiet_NaN());
  }
}

Eigen::MatrixXd half_mean(const Eigen::MatrixXd& diff) {
  const Eigen::Index h = std::max<Eigen::Index>(diff.rows() / 2, 1);
  return diff.topRows(h).colwise().mean().transpose();
}

/// Coulton & Wandelt (2023): the compressed estimator compresses with one half
/// of the derivative realisations and measures the compressed derivative with
/// the other (biased low); the geometric mean with the standard estimator
/// (biased high) is the combined one. The compression's covariance and the
/// compressed statistic's covariance come from disjoint halves of the
/// fiducial realisations, so the second is an honest estimate of WᵀCW. All
/// four assignments of halves are averaged.
Eigen::MatrixXd compressed_fisher(const detail::FisherModel& m, const detail::Stencil& st, bool shrink) {
  const auto np = static_cast<Eigen::Index>(st.params.size());
  const auto d = m.fiducial.cols();
  Eigen::MatrixXd DA(d, np), DB(d, np);
  for (Eigen::Index j = 0; j < np; ++j) {
    const auto* p = st.find(st.params[static_cast<std::size_t>(j)], st.step_index);
    const auto& diff = m.diff[static_cast<std::size_t>(p - st.pairs.data())];
    const Eigen::Index h = diff.rows() / 2;
    if (h < 1) throw InputError("--combined needs at least 2 matched stencil realisations per parameter");
    DA.col(j) = diff.topRows(h).colwise().mean().transpose();
    DB.col(j) = diff.bottomRows(diff.rows() - h).colwise().mean().transpose();
  }
  const Eigen::Index n = m.fiducial.rows(), h = n / 2;
  if (!shrink && static_cast<std::size_t>(h) < static_cast<std::size_t>(d) + 3)
    throw InputError("--combined splits the fiducial realisations in halves: " + std::to_string(h) +
                     " per half is too few for " + std::to_string(d) + " coefficients (needs " +
                     std::to_string(d + 3) + "); pass --shrink or select fewer coefficients");
  const Eigen::MatrixXd X1 = m.fiducial.topRows(h), X2 = m.fiducial.bottomRows(n - h);
  Eigen::MatrixXd total = Eigen::MatrixXd::Zero(np, np);
  for (int cswap = 0; cswap < 2; ++cswap) {
    const Eigen::MatrixXd& Xc = cswap ? X2 : X1;  // covariance of the compression
    const Eigen::MatrixXd& Xt = cswap ? X1 : X2;  // covariance of the compressed statistic
    const Eigen::MatrixXd Pc = spd_inverse(shrink ? ledoit_wolf(Xc).cov : mean_cov(Xc).cov, "the half covariance");
    for (int dswap = 0; dswap < 2; ++dswap) {
      const Eigen::MatrixXd& Dc = dswap ? DB : DA;  // compresses
      const Eigen::MatrixXd& Dm = dswap ? DA : DB;  // measures the compressed derivative
      const Eigen::MatrixXd W = Pc * Dc;            // t = Wᵀ x (its scale does not matter)
      const auto tc = mean_cov(Xt * W);
      const Eigen::MatrixXd dt = W.transpose() * Dm;  // ∂t/∂θ
      total += fisher_matrix(dt, hartlap_factor(static_cast<std::size_t>(Xt.rows()), static_cast<std::size_t>(np)) *
                                     spd_inverse(tc.cov, "the compressed covariance"));
    }
  }
  return 0.25 * total;
}

std::string fmt(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.4g", v);
  return buf;
}
}  // namespace

void run_fisher(const FisherOptions& o) {
  Catalogue cat(o.catalogue);
  auto sels = detail::selections(cat, o.selects);
  const auto st = detail::stencil(cat, o.point, o.step_index, o.allow_incomplete);
  const Design& des = cat.design();
  const auto np = st.params.size();
  if (o.tolerance <= 0) throw InputError("--tolerance " + std::to_string(o.tolerance) + " must be > 0");

  core::OutputFile target(o.output);  // written whole or not at all
  h5::Id out = h5::create_memory_file();
  detail::write_output_header(out.get(), cat, "fisher");
  std::vector<std::string> pnames, punits, plabels;
  std::vector<double> pfid, plog;
  for (auto i : st.params) {
    plabels.push_back(des.labels[i]);
    plog.push_back(des.log[i] ? 1.0 : 0.0);
    pnames.push_back(detail::fisher_param_name(des, i));
    punits.push_back(des.log[i] && !des.units[i].empty() ? "log10(" + des.units[i] + ")" : des.units[i]);
    double v = des.points(st.fiducial, static_cast<Eigen::Index>(i));
    pfid.push_back(des.log[i] ? std::log10(v) : v);
  }
  h5::write_attr(out.get(), "param_names", pnames);
  h5::write_attr(out.get(), "param_units", punits);
  h5::write_attr(out.get(), "param_labels", plabels);  // the campaign's labels, in physical terms
  h5::write_attr(out.get(), "param_log", plog);        // 1: the Fisher coordinate is log10 of the parameter
  h5::write_attr(out.get(), "fiducial", pfid);
  h5::write_attr(out.get(), "fiducial_point", st.fiducial);
  h5::write_attr(out.get(), "step_index", st.step_index);
  h5::write_attr(out.get(), "tolerance", o.tolerance);

  struct Row {
    std::string name;
    Eigen::VectorXd marg, cond, comb;
    std::size_t n_data;
    double hartlap;
    std::vector<std::string> flags;
    double condition = 0;  // of the correlation matrix
  };
  std::vector<Row> rows;
  std::vector<std::string> names;
  for (auto& sel : sels) {
    auto m = detail::fisher_model(cat, sel, st, o.transform, o.shrink, o.covariance_file);
    if (static_cast<std::size_t>(m.fiducial.cols()) < np)
      throw InputError("selection '" + m.selection.name + "' has " + std::to_string(m.fiducial.cols()) +
                       " coefficients for " + std::to_string(np) +
                       " parameters: a Fisher matrix needs at least as many coefficients as parameters");
    const std::string fname = "the Fisher matrix of selection '" + m.selection.name + "' (" +
                              std::to_string(m.fiducial.cols()) + " coefficients, " + std::to_string(np) +
                              " parameters)";
    const Eigen::MatrixXd Finv = spd_inverse(m.fisher, fname);
    Row row{m.selection.name, Finv.diagonal().array().sqrt(), conditional_errors(m.fisher), {},
            static_cast<std::size_t>(m.fiducial.cols()), m.hartlap, {}, m.conditioning.correlation};
    // Convergence: the same forecast from half the covariance realisations,
    // half the derivative realisations, and each other step size.
    std::vector<Check> checks;
    const std::size_t n = static_cast<std::size_t>(m.fiducial.rows()), d = row.n_data;
    const std::size_t h = n / 2;
    if (!o.covariance_file.empty()) {
      row.flags.push_back("half-covariance check skipped: the covariance comes from " + o.covariance_file);
    } else if (o.shrink ? h >= 3 : h >= d + 3) {  // Ledoit-Wolf on 2 rows does not shrink at all
      const Eigen::MatrixXd Xh = m.fiducial.topRows(static_cast<Eigen::Index>(h));
      const Eigen::MatrixXd C = o.shrink ? ledoit_wolf(Xh).cov : mean_cov(Xh).cov;
      const std::string label = "half covariance realisations (" + std::to_string(h) + ")";
      try {
        const Eigen::MatrixXd P = (o.shrink ? 1.0 : hartlap_factor(h, d)) * spd_inverse(C, "the half covariance");
        checks.push_back({label, variant_sigma(m.derivatives, P)});
      } catch (const InputError&) {
        checks.push_back({label, Eigen::VectorXd::Constant(static_cast<Eigen::Index>(np), NAN)});
      }
    } else {
      row.flags.push_back("half-covariance check skipped: " + std::to_string(h) + " realisations are too few (need " +
                          std::to_string(o.shrink ? 3 : d + 3) + ")");
    }
    {
      Eigen::MatrixXd Dh = m.derivatives;
      for (std::size_t j = 0; j < np; ++j) {
        const auto* p = st.find(st.params[j], st.step_index);
        Dh.col(static_cast<Eigen::Index>(j)) = half_mean(m.diff[static_cast<std::size_t>(p - st.pairs.data())]);
      }
      checks.push_back({"half derivative realisations", variant_sigma(Dh, m.precision)});
    }
    for (auto s : st.step_indices()) {
      if (s == st.step_index) continue;
      Eigen::MatrixXd Ds = m.derivatives;
      bool any = false;
      for (std::size_t j = 0; j < np; ++j)
        if (const auto* p = st.find(st.params[j], s)) {
          Ds.col(static_cast<Eigen::Index>(j)) = m.diff[static_cast<std::size_t>(p - st.pairs.data())].colwise().mean().transpose();
          any = true;
        }
      if (any) checks.push_back({"step index " + std::to_string(s), variant_sigma(Ds, m.precision)});
    }
    h5::Id g = h5::create_group(out.get(), m.selection.name);
    h5::write_doubles(g.get(), "fisher", flat(m.fisher), {np, np});
    h5::write_doubles(g.get(), "fisher_inverse", flat(Finv), {np, np});
    h5::write_doubles(g.get(), "sigma_marginal", flat(row.marg), {np});
    h5::write_doubles(g.get(), "sigma_conditional", flat(row.cond), {np});
    h5::write_doubles(g.get(), "derivatives", flat(m.derivatives), {d, np});
    h5::write_doubles(g.get(), "mean", flat(m.mean), {d});
    h5::write_attr(g.get(), "hartlap_factor", m.hartlap);
    h5::write_attr(g.get(), "correlation_condition_number", m.conditioning.correlation);
    h5::write_attr(g.get(), "n_realisations", static_cast<std::int64_t>(n));
    h5::write_attr(g.get(), "n_data", static_cast<std::int64_t>(d));
    h5::write_attr(g.get(), "transform", m.transform.describe());
    h5::write_attr(g.get(), "shrinkage", std::string(o.shrink ? "ledoit-wolf-2004" : "none"));
    std::vector<std::int64_t> nder;
    for (auto i : st.params) nder.push_back(static_cast<std::int64_t>(st.find(i, st.step_index)->plus_entries.size()));
    h5::write_ints(g.get(), "n_derivative_realisations", nder, {np});
    {
      h5::Id cg = h5::create_group(g.get(), "convergence");
      std::vector<std::string> labels;
      std::vector<double> sig, ratio;
      std::vector<std::int64_t> flagged;
      for (const auto& c : checks) {
        labels.push_back(c.label);
        for (std::size_t j = 0; j < np; ++j) {
          const double r = c.sigma[static_cast<Eigen::Index>(j)] / row.marg[static_cast<Eigen::Index>(j)];
          sig.push_back(c.sigma[static_cast<Eigen::Index>(j)]);
          ratio.push_back(r);
          const bool bad = !(std::abs(r - 1.0) <= o.tolerance);
          flagged.push_back(bad);
          if (bad)
            row.flags.push_back(c.label + ": sigma(" + pnames[j] + ") moves by " + fmt(100 * (r - 1)) + "% (tolerance " +
                                fmt(100 * o.tolerance) + "%)");
        }
      }
      h5::write_strings(cg.get(), "labels", labels);
      h5::write_doubles(cg.get(), "sigma_marginal", sig, {checks.size(), np});
      h5::write_doubles(cg.get(), "ratio", ratio, {checks.size(), np});
      h5::write_ints(cg.get(), "flagged", flagged, {checks.size(), np});
    }
    if (o.combined) {
      const Eigen::MatrixXd Fc = compressed_fisher(m, st, o.shrink);
      const Eigen::MatrixXd Fg = geometric_mean(m.fisher, Fc);
      row.comb = marginal_errors(Fg);
      h5::Id cg = h5::create_group(g.get(), "combined");
      h5::write_doubles(cg.get(), "fisher_compressed", flat(Fc), {np, np});
      h5::write_doubles(cg.get(), "sigma_compressed", flat(Eigen::VectorXd(marginal_errors(Fc))), {np});
      h5::write_doubles(cg.get(), "fisher", flat(Fg), {np, np});
      h5::write_doubles(cg.get(), "fisher_inverse", flat(Eigen::MatrixXd(spd_inverse(Fg, "the combined Fisher"))), {np, np});
      h5::write_doubles(cg.get(), "sigma_marginal", flat(row.comb), {np});
    }
    detail::write_selection(g.get(), cat, m.selection);
    names.push_back(m.selection.name);
    rows.push_back(std::move(row));
  }
  h5::write_attr(out.get(), "selections", names);
  h5::save_file(out, target);

  // The comparison table: one column per selection, marginalised (conditional) 1σ.
  std::printf("Fisher forecast: fiducial point %lld, %zu realisations, step index %lld\n",
              static_cast<long long>(st.fiducial), st.fiducial_entries.size(), static_cast<long long>(st.step_index));
  std::printf("1-sigma marginalised (conditional)%s\n", o.combined ? " [combined estimator]" : "");
  int w0 = 20;
  for (const auto& pn : pnames) w0 = std::max(w0, static_cast<int>(pn.size()));
  const int w = 28;
  std::printf("%-*s %-12s", w0, "parameter", "fiducial");
  for (const auto& r : rows) std::printf(" | %-*s", w, r.name.substr(0, w).c_str());
  std::printf("\n");
  for (std::size_t j = 0; j < np; ++j) {
    std::printf("%-*s %-12s", w0, pnames[j].c_str(), fmt(pfid[j]).c_str());
    for (const auto& r : rows) {
      std::string cell = fmt(r.marg[static_cast<Eigen::Index>(j)]) + " (" + fmt(r.cond[static_cast<Eigen::Index>(j)]) + ")";
      if (o.combined) cell += " [" + fmt(r.comb[static_cast<Eigen::Index>(j)]) + "]";
      std::printf(" | %-*s", w, cell.c_str());
    }
    std::printf("\n");
  }
  std::printf("%-*s %-12s", w0, "data-vector length", "");
  for (const auto& r : rows) std::printf(" | %-*zu", w, r.n_data);
  std::printf("\n%-*s %-12s", w0, "Hartlap factor", "");
  for (const auto& r : rows) std::printf(" | %-*s", w, fmt(r.hartlap).c_str());
  std::printf("\n%-*s %-12s", w0, "condition number", "");  // of the correlation matrix (docs/analysis.md)
  for (const auto& r : rows) std::printf(" | %-*s", w, fmt(r.condition).c_str());
  std::printf("\n");
  bool any_flag = false;
  for (const auto& r : rows)
    for (const auto& f : r.flags) {
      std::printf("convergence flag [%s]: %s\n", r.name.c_str(), f.c_str());
      any_flag = true;
    }
  if (!any_flag) std::printf("convergence: every check within %s%%\n", fmt(100 * o.tolerance).c_str());
  std::printf("wrote %s\n", o.output.c_str());
  std::fflush(stdout);
  if (o.plot) {
    const std::string png = o.plot_path.empty() ? detail::derived_png(o.output, "_corner") : o.plot_path;
    if (detail::run_plot("plot_corner.py", {o.output, png})) std::printf("wrote %s\n", png.c_str());
  }
}

}  // namespace spinflip::analysis
