#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <limits>
#include <ctime>
#include <filesystem>
#include <map>
#include <sstream>

#include <toml++/toml.h>

#include "analysis/estimators.hpp"
#include "analysis/internal.hpp"
#include "core/errors.hpp"
#include "core/log.hpp"
#include "core/version.hpp"

extern char** environ;

namespace spinflip::analysis::detail {

std::vector<std::size_t> done_entries(const Catalogue& cat, std::int64_t point, bool allow_incomplete,
                                      const std::string& what) {
  const auto& pts = cat.entry_point();
  const auto& st = cat.entry_status();
  std::vector<std::size_t> done;
  std::size_t pending = 0, failed = 0, total = 0;
  for (std::size_t e = 0; e < pts.size(); ++e) {
    if (pts[e] != point) continue;
    ++total;
    if (st[e] == 1) done.push_back(e);
    else if (st[e] == 2) ++failed;
    else ++pending;
  }
  if (pending > 0 && !allow_incomplete)
    throw InputError(cat.path() + ": " + std::to_string(pending) + " of " + std::to_string(total) + " entries of " +
                     what + " (point " + std::to_string(point) +
                     ") are still pending (status 0); finish `spinflip run` or pass --allow-incomplete");
  if (failed > 0) log::warn("{}: {} failed entries of {} (point {}) are left out", cat.path(), failed, what, point);
  const auto& real = cat.entry_realisation();
  std::sort(done.begin(), done.end(), [&](auto a, auto b) { return real[a] < real[b]; });
  return done;
}

std::int64_t fiducial_point(const Catalogue& cat, std::optional<std::int64_t> chosen) {
  const auto& role = cat.design().role;
  std::vector<std::int64_t> fid;
  for (std::size_t i = 0; i < role.size(); ++i)
    if (role[i] == "fiducial") fid.push_back(static_cast<std::int64_t>(i));
  if (fid.empty())
    throw InputError(cat.path() + ": the design has no point with role 'fiducial', so there are no realisations "
                     "for a covariance (add a fiducial design to the campaign)");
  if (chosen) {
    if (std::find(fid.begin(), fid.end(), *chosen) == fid.end()) {
      std::string list;
      for (auto p : fid) list += (list.empty() ? "" : ", ") + std::to_string(p);
      throw InputError("--point " + std::to_string(*chosen) + " is not a fiducial point of " + cat.path() +
                       " (fiducial points: " + list + ")");
    }
    return *chosen;
  }
  if (fid.size() > 1) {
    std::string list;
    for (auto p : fid) list += (list.empty() ? "" : ", ") + std::to_string(p);
    throw InputError(cat.path() + " has several fiducial points (" + list + "); choose one with --point");
  }
  return fid.front();
}

std::vector<std::string> campaign_selects(const Catalogue& cat) {
  const std::string text = h5::attr_text(static_cast<hid_t>(cat.hdf5_file()), "campaign_text");
  std::vector<std::string> out;
  if (text.empty()) return out;
  try {
    const toml::table t = toml::parse(text);
    if (const auto* arr = t["analysis"]["select"].as_array())
      for (const auto& v : *arr)
        if (auto s = v.value<std::string>()) out.push_back(*s);
  } catch (const toml::parse_error&) {  // validated when the campaign ran; a hand-edited text just has no defaults
  }
  return out;
}

std::vector<Selection> selections(const Catalogue& cat, const std::vector<std::string>& given) {
  std::vector<Selection> out;
  std::vector<std::string> texts = given;
  if (texts.empty()) {
    texts = campaign_selects(cat);
    if (!texts.empty())
      log::info("no --select given: using the {} selection(s) of the campaign's [analysis] select", texts.size());
  }
  if (texts.empty()) out.push_back(select(cat, "", 0));
  for (std::size_t i = 0; i < texts.size(); ++i) out.push_back(select(cat, texts[i], i));
  for (std::size_t i = 0; i < out.size(); ++i)
    for (std::size_t j = 0; j < i; ++j)
      if (out[i].name == out[j].name)
        throw InputError("--select '" + out[i].text + "' and '" + out[j].text + "' have the same name '" +
                         out[i].name + "'; give each a distinct name=LABEL");
  return out;
}

void drop_degenerate(const Catalogue& cat, Selection& sel, Eigen::MatrixXd& reference,
                     std::vector<Eigen::MatrixXd*> others, bool drop_constant, const std::string& what) {
  const auto labels = element_labels(cat, sel);
  std::vector<Eigen::Index> keep;
  std::size_t n_nan = 0, n_const = 0;
  for (Eigen::Index c = 0; c < reference.cols(); ++c) {
    auto col = reference.col(c);
    const Eigen::Index nan = (col.array() != col.array()).count();
    bool partial_other = false;
    for (auto* m : others) partial_other |= m->col(c).hasNaN();
    if (nan == reference.rows()) {
      ++n_nan;
      continue;
    }
    if (nan > 0 || partial_other)
      throw InputError(cat.path() + ": coefficient " + labels[static_cast<std::size_t>(c)] +
                       " is NaN in some done entries only; exclude it with an axis filter in --select '" + sel.text + "'");
    if (drop_constant && col.maxCoeff() == col.minCoeff()) {
      ++n_const;
      continue;
    }
    keep.push_back(c);
  }
  if (n_nan + n_const == 0) return;
  if (keep.empty())
    throw InputError("--select '" + sel.text + "': every selected coefficient is NaN or constant over the " + what +
                     "s, so there is nothing to analyse");
  std::vector<Element> els;
  for (auto c : keep) els.push_back(sel.elements[static_cast<std::size_t>(c)]);
  sel.elements = std::move(els);
  // One line naming them: NaN = a bin without a kept mode (DESIGN.md §5), constant = no information.
  auto names = [&](bool want_nan) {
    std::string out;
    std::size_t listed = 0, total = 0;
    for (Eigen::Index c = 0, k = 0; c < reference.cols(); ++c) {
      if (k < static_cast<Eigen::Index>(keep.size()) && keep[static_cast<std::size_t>(k)] == c) {
        ++k;
        continue;
      }
      if (std::isnan(reference(0, c)) != want_nan) continue;
      if (++total > 6) continue;
      out += (listed++ ? "; " : "") + labels[static_cast<std::size_t>(c)];
    }
    if (total > listed) out += "; and " + std::to_string(total - listed) + " more";
    return out;
  };
  std::ostringstream note;
  note << "dropped";
  if (n_nan) note << " " << n_nan << " NaN coefficients (NaN in every " << what << "; an instrument kept no mode of that bin): "
                    << names(true);
  if (n_nan && n_const) note << ";";
  if (n_const) note << " " << n_const << " constant coefficients (no information): " << names(false);
  sel.notes.push_back(note.str());
  log::warn("selection '{}': {}", sel.name, note.str());
  auto compact = [&](Eigen::MatrixXd& m) {
    Eigen::MatrixXd out(m.rows(), static_cast<Eigen::Index>(keep.size()));
    for (std::size_t k = 0; k < keep.size(); ++k) out.col(static_cast<Eigen::Index>(k)) = m.col(keep[k]);
    m = std::move(out);
  };
  compact(reference);
  for (auto* m : others) compact(*m);
}

void Transformer::fit(const Eigen::MatrixXd& fiducial) {
  if (kind != Transform::standardise) return;
  const auto mc = mean_cov(fiducial);
  mean = mc.mean;
  sd = mc.cov.diagonal().array().sqrt();
}

CellNamer cell_namer(const Catalogue& cat, const Selection& sel, const std::vector<std::size_t>& entries) {
  return [&cat, &sel, &entries, labels = element_labels(cat, sel)](Eigen::Index r, Eigen::Index c) {
    const std::size_t e = entries.at(static_cast<std::size_t>(r));
    return "entry " + std::to_string(e) + " (point " + std::to_string(cat.entry_point()[e]) + ", realisation " +
           std::to_string(cat.entry_realisation()[e]) + "), coefficient " + labels.at(static_cast<std::size_t>(c));
  };
}

std::string nan_cause(const Catalogue& cat, const Selection& sel, Eigen::Index col) {
  const auto& el = sel.elements.at(static_cast<std::size_t>(col));
  const auto& blk = cat.blocks()[el.block];
  if (auto it = blk.axes.find("n_modes"); it != blk.axes.end() && el.coeff < it->second.size() && it->second[el.coeff] == 0)
    return "an empty bin: the instrument kept no Fourier mode there (n_modes=0)";
  if (blk.kernel.find("moments") != std::string::npos)
    return "a moment of a constant unit: skewness and kurtosis are undefined when the variance is 0 "
           "(e.g. a fully ionized or fully neutral slice)";
  return "the kernel " + blk.kernel + " gave no finite value for this unit";
}

void Transformer::apply(Eigen::MatrixXd& X, const std::string& what, const CellNamer& where) const {
  if (kind == Transform::log) {
    const Eigen::Index n_bad = (X.array() <= 0).count();
    if (n_bad > 0) {
      std::string first;
      if (where) {
        for (Eigen::Index c = 0; c < X.cols() && first.empty(); ++c)
          for (Eigen::Index r = 0; r < X.rows(); ++r)
            if (X(r, c) <= 0) {
              std::ostringstream v;
              v << X(r, c);
              first = ", first " + where(r, c) + " = " + v.str();
              break;
            }
      }
      throw InputError("--transform log: " + what + " has " + std::to_string(n_bad) + " values ≤ 0" + first +
                       "; select positive ones only (e.g. power spectra, scattering S1/S2) or use --transform "
                       "standardise");
    }
    X = X.array().log().matrix();
  } else if (kind == Transform::standardise) {
    X = ((X.rowwise() - mean.transpose()).array().rowwise() / sd.transpose().array()).matrix();
  }
}

std::string Transformer::describe() const {
  switch (kind) {
    case Transform::log: return "log: natural logarithm of every coefficient";
    case Transform::standardise: return "standardise: (x - fiducial mean) / fiducial standard deviation";
    default: return "none";
  }
}

Conditioning conditioning(const Catalogue& cat, const Selection& sel, const Eigen::MatrixXd& cov, std::size_t n) {
  Conditioning c;
  c.covariance = condition_number(cov);
  const Eigen::MatrixXd corr = correlation(cov);
  c.correlation = corr.allFinite() ? condition_number(corr) : std::numeric_limits<double>::infinity();
  const std::size_t p = static_cast<std::size_t>(cov.rows());
  const auto labels = element_labels(cat, sel);
  if (n <= p) {
    c.cause = std::to_string(p) + " coefficients from " + std::to_string(n) +
              " realisations: a sample covariance has rank at most n - 1 = " + std::to_string(n - 1);
    return c;
  }
  // A coefficient whose spread is tiny next to the others of its kernel and quantity
  // (e.g. a bin the instrument emptied that still holds rounding residue) makes the
  // covariance singular in all but name, though its correlations look harmless.
  const auto& blocks = cat.blocks();
  {
    std::map<std::pair<std::size_t, double>, std::vector<double>> groups;
    auto group_of = [&](std::size_t a) {
      const auto& e = sel.elements[a];
      const auto q = blocks[e.block].axes.find("quantity");
      return std::pair{e.block, q == blocks[e.block].axes.end() ? -1.0 : q->second[e.coeff]};
    };
    for (std::size_t a = 0; a < p; ++a) groups[group_of(a)].push_back(std::sqrt(cov(a, a)));
    for (auto& [key, sds] : groups) std::sort(sds.begin(), sds.end());
    for (std::size_t a = 0; a < p; ++a) {
      const auto& sds = groups[group_of(a)];
      const double median = sds[sds.size() / 2];
      if (sds.size() >= 3 && !(std::sqrt(cov(a, a)) > 1e-6 * median)) {
        c.cause = "coefficient " + labels[a] + " has (nearly) zero variance next to the rest of its kernel "
                  "(a bin without kept modes from a catalogue made before observed modes? select it out)";
        c.vanishing = true;
        return c;
      }
    }
  }
  // P and delta2 of one bin and unit are the same modes weighted differently.
  for (std::size_t a = 0; a < sel.elements.size(); ++a) {
    const auto& ea = sel.elements[a];
    const auto& b = blocks[ea.block];
    const auto q = b.axes.find("quantity"), lo_k = b.axes.find("k_lo");
    if (q == b.axes.end() || lo_k == b.axes.end() || b.kernel.find("bispectrum") != std::string::npos) continue;
    for (std::size_t d = a + 1; d < sel.elements.size(); ++d) {
      const auto& ed = sel.elements[d];
      if (ed.block == ea.block && ed.unit == ea.unit && q->second[ea.coeff] != q->second[ed.coeff] &&
          lo_k->second[ea.coeff] == lo_k->second[ed.coeff]) {
        c.cause = "P and delta2 of the same bin are selected together (" + labels[a] + " and " + labels[d] +
                  "): select one with quantity=0 or quantity=1";
        return c;
      }
    }
  }
  // Otherwise name the coefficients that carry the near-null direction of the correlation.
  if (corr.allFinite()) {
    Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> es(corr);
    const Eigen::VectorXd v = es.eigenvectors().col(0).cwiseAbs();
    std::vector<Eigen::Index> order(static_cast<std::size_t>(v.size()));
    for (Eigen::Index i = 0; i < v.size(); ++i) order[static_cast<std::size_t>(i)] = i;
    std::sort(order.begin(), order.end(), [&](auto x, auto y) { return v(x) > v(y); });
    c.cause = "nearly redundant coefficients: the weakest direction is mostly " +
              labels[static_cast<std::size_t>(order[0])] +
              (order.size() > 1 ? " against " + labels[static_cast<std::size_t>(order[1])] : std::string());
  }
  return c;
}

void check_conditioning(const Conditioning& c, const std::string& selection) {
  char num[48];
  if (std::isfinite(c.correlation)) std::snprintf(num, sizeof num, "%.3g", c.correlation);
  else std::snprintf(num, sizeof num, "infinite (singular)");
  if (c.vanishing)
    throw InputError("selection '" + selection + "': " + c.cause + "; no forecast from a covariance that cannot be "
                     "inverted: select fewer coefficients (an axis filter such as n_modes=1:), or pass --shrink");
  if (c.correlation > max_condition || !std::isfinite(c.correlation)) {
    char lim[32];
    std::snprintf(lim, sizeof lim, "%.0e", max_condition);
    throw InputError("selection '" + selection + "': correlation-matrix condition number " + num + " exceeds " + lim +
                     " (" + c.cause + "); no forecast from a covariance that cannot be inverted: pass --shrink, "
                     "select fewer coefficients (every=N, an axis filter), or run more fiducial realisations");
  }
  if (c.correlation > warn_condition)
    log::warn("selection '{}': correlation-matrix condition number {} ({})", selection, num, c.cause);
}

void require_realisations(std::size_t n, std::size_t p, const std::string& selection, bool shrink) {
  if (shrink || n >= p + 3) return;
  throw InputError("selection '" + selection + "' has " + std::to_string(p) + " coefficients but only " +
                   std::to_string(n) + " fiducial realisations: an inverse covariance (Hartlap factor " +
                   "(n-p-2)/(n-1) > 0) needs at least " + std::to_string(p + 3) +
                   "; select fewer coefficients, run more realisations, or pass --shrink");
}

void write_selection(hid_t group, const Catalogue& cat, const Selection& sel) {
  h5::Id g = h5::create_group(group, "selection");
  h5::write_attr(g.get(), "name", sel.name);
  h5::write_attr(g.get(), "text", sel.text);
  h5::write_attr(g.get(), "record", selection_record(cat, sel));
  std::vector<std::string> scen, kern;
  std::vector<std::int64_t> unit, coeff, n_avg;
  std::vector<double> freq, z;
  for (const auto& el : sel.elements) {
    const auto& b = cat.blocks()[el.block];
    scen.push_back(b.scenario);
    kern.push_back(b.kernel);
    unit.push_back(static_cast<std::int64_t>(el.unit));
    coeff.push_back(static_cast<std::int64_t>(el.coeff));
    n_avg.push_back(static_cast<std::int64_t>(std::max<std::size_t>(el.average.size(), 1)));
    freq.push_back(b.unit_freq_MHz.size() == b.n_units ? b.unit_freq_MHz[el.unit] : NAN);
    z.push_back(b.unit_z.size() == b.n_units ? b.unit_z[el.unit] : NAN);
  }
  const hsize_t n = sel.elements.size();
  h5::write_strings(g.get(), "scenario", scen);
  h5::write_strings(g.get(), "kernel", kern);
  h5::write_ints(g.get(), "unit", unit, {n});
  h5::write_ints(g.get(), "coeff", coeff, {n});
  h5::write_ints(g.get(), "n_averaged", n_avg, {n});  // >1: a rotation mean starting at coeff
  h5::write_doubles(g.get(), "unit_freq_MHz", freq, {n});
  h5::write_doubles(g.get(), "unit_z", z, {n});
  h5::write_strings(g.get(), "label", element_labels(cat, sel));
}

void write_output_header(hid_t file, const Catalogue& cat, const std::string& kind) {
  h5::write_attr(file, "spinflip_output", kind);
  h5::write_attr(file, "tool_version", std::string(tool_version));
  h5::write_attr(file, "git_revision", std::string(git_revision));
  h5::write_attr(file, "created_utc", now_utc());
  h5::write_attr(file, "source_catalogue", std::filesystem::absolute(cat.path()).string());
  // The catalogue's own provenance travels with every product made from it.
  h5::Id prov = h5::create_group(file, "provenance");
  h5::copy_attributes(static_cast<hid_t>(cat.hdf5_file()), prov.get());
}

namespace {
std::filesystem::path plot_dir() {
  namespace fs = std::filesystem;
  if (const char* env = std::getenv("SPINFLIP_PLOT_DIR"); env && *env) return env;
  std::error_code ec;
  const fs::path exe = fs::read_symlink("/proc/self/exe", ec);
  if (!ec) {
    for (const fs::path rel : {"../share/spinflip/plots", "../python/plots", "../../python/plots"}) {
      const fs::path p = exe.parent_path() / rel;
      if (fs::exists(p / "plot_corner.py")) return p;
    }
  }
  return SPINFLIP_PLOT_SOURCE_DIR;
}
}  // namespace

bool run_plot(const std::string& script, const std::vector<std::string>& args) {
  const auto path = plot_dir() / script;
  const char* py_env = std::getenv("SPINFLIP_PYTHON");
  const std::string python = py_env && *py_env ? py_env : "/usr/bin/python3";
  if (!std::filesystem::exists(path)) {
    log::warn("plot skipped: {} not found (set SPINFLIP_PLOT_DIR to the folder holding the plot scripts)",
              path.string());
    return false;
  }
  if (access(python.c_str(), X_OK) != 0) {
    log::warn("plot skipped: no python interpreter at {} (set SPINFLIP_PYTHON; needs numpy, h5py, matplotlib)", python);
    return false;
  }
  std::vector<std::string> argv_s = {python, path.string()};
  argv_s.insert(argv_s.end(), args.begin(), args.end());
  std::vector<char*> argv;
  for (auto& s : argv_s) argv.push_back(s.data());
  argv.push_back(nullptr);
  pid_t pid = 0;
  if (posix_spawn(&pid, python.c_str(), nullptr, nullptr, argv.data(), environ) != 0) {
    log::warn("plot skipped: cannot start {}", python);
    return false;
  }
  int status = 0;
  waitpid(pid, &status, 0);
  if (!WIFEXITED(status) || WEXITSTATUS(status) != 0) {
    log::warn("plot failed: {} {} exited with status {} (is matplotlib installed?)", python, path.string(),
              WIFEXITED(status) ? WEXITSTATUS(status) : -1);
    return false;
  }
  return true;
}

std::string derived_png(const std::string& output, const std::string& suffix) {
  std::filesystem::path p(output);
  p.replace_extension();
  return p.string() + suffix + ".png";
}

std::string now_utc() {
  const std::time_t t = std::chrono::system_clock::to_time_t(std::chrono::system_clock::now());
  std::tm tm{};
  gmtime_r(&t, &tm);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%SZ", &tm);
  return buf;
}

}  // namespace spinflip::analysis::detail
