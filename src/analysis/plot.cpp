// spinflip plot: a statistic against redshift (or against k / j at one
// redshift) for the coefficients of one --select, across the design points
// coloured by a parameter, or as the fiducial mean with a ±1σ band. This file
// decides what goes in which panel and writes it to a small HDF5 file; the
// drawing is python/plots/plot_statistic.py (docs/analysis.md, "Plots").
#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <map>
#include <set>
#include <sstream>

#include "analysis/internal.hpp"
#include "core/errors.hpp"
#include "core/log.hpp"

namespace spinflip::analysis {
namespace {

constexpr std::size_t kMaxPanels = 16;  // beyond this the panels are too small to read

std::string num(double v, int precision = 3) {
  std::ostringstream os;
  os.precision(precision);
  os << v;
  return os.str();
}

std::vector<std::string> split_names(const std::string& text) {
  std::vector<std::string> out;
  std::stringstream ss(text);
  for (std::string s; std::getline(ss, s, ',');) out.push_back(s);
  return out;
}

double axis(const Block& b, const char* name, std::size_t c) {
  auto it = b.axes.find(name);
  return it == b.axes.end() ? NAN : it->second[c];
}
bool has(const Block& b, const char* name) { return b.axes.count(name) > 0; }
bool is_power(const Block& b) { return has(b, "k_lo") && has(b, "k_hi") && !has(b, "k1"); }
bool is_scattering(const Block& b) { return has(b, "order") && has(b, "j1"); }

std::string attr(const Block& b, const std::string& name, const std::string& fallback = "") {
  auto it = b.attrs.find(name);
  return it == b.attrs.end() || it->second.empty() ? fallback : it->second;
}

/// Name of the quantity of coefficient c, with its unit ("Δ² [mK^2]").
struct Quantity {
  std::string symbol, unit;
  std::string label() const { return unit.empty() ? symbol : symbol + " [" + unit + "]"; }
};
Quantity quantity(const Block& b, std::size_t c) {
  if (is_power(b)) {
    const bool d2 = axis(b, "quantity", c) == 1;
    return d2 ? Quantity{"Δ²", attr(b, "delta2_unit", "mK^2")} : Quantity{"P", attr(b, "power_unit", "mK^2 Mpc^3")};
  }
  if (is_scattering(b)) {
    const long o = std::lround(axis(b, "order", c));
    const bool ratio = o == 2 && attr(b, "normalise") == "1";
    return {"S" + std::to_string(o) + (ratio ? "/S1" : ""), ratio ? "" : "mK"};
  }
  if (has(b, "quantity")) {
    const auto names = split_names(attr(b, "quantity_names"));
    const auto q = static_cast<std::size_t>(std::max(0L, std::lround(axis(b, "quantity", c))));
    if (q < names.size()) return {names[q], ""};
  }
  return {b.kernel, ""};
}

/// What a coefficient is, without its unit: "k = 0.10–0.15 Mpc⁻¹", "j1 = 0, j2 = 2".
std::string coefficient_text(const Block& b, const Element& el) {
  const std::size_t c = el.coeff;
  if (is_power(b)) return "k = " + num(axis(b, "k_lo", c)) + "–" + num(axis(b, "k_hi", c)) + " Mpc⁻¹";
  if (is_scattering(b)) {
    const long o = std::lround(axis(b, "order", c));
    std::string s;
    if (o >= 1) s = "j1 = " + std::to_string(std::lround(axis(b, "j1", c)));
    if (o >= 1 && el.average.empty() && axis(b, "l1", c) >= 0) s += ", ℓ1 = " + std::to_string(std::lround(axis(b, "l1", c)));
    if (o == 2) {
      s += ", j2 = " + std::to_string(std::lround(axis(b, "j2", c)));
      const long l2 = el.average.empty() ? std::lround(axis(b, "l2", c)) : el.delta;
      const bool reduced = !el.average.empty() || attr(b, "reduce") == "rotation";
      s += reduced ? ", δ = " + std::to_string(l2) : ", ℓ2 = " + std::to_string(l2);
    }
    return o == 0 ? "mean of the field" : s;
  }
  std::string s;
  for (const auto& [name, v] : b.axes)
    if (name != "quantity" && name != "n_modes" && std::isfinite(v[c])) s += (s.empty() ? "" : ", ") + name + " = " + num(v[c]);
  return s.empty() ? "coefficient " + std::to_string(c) : s;
}

/// x of a coefficient when plotting against the coefficients: k for power
/// (the modes' mean |k|, else the bin's geometric centre), j1 (S1) or j2 (S2).
double coefficient_x(const Block& b, const Element& el) {
  const std::size_t c = el.coeff;
  if (is_power(b)) {
    const double km = axis(b, "k_mean", c);
    return std::isfinite(km) ? km : std::sqrt(axis(b, "k_lo", c) * axis(b, "k_hi", c));
  }
  if (is_scattering(b)) {
    const long o = std::lround(axis(b, "order", c));
    return o == 2 ? axis(b, "j2", c) : o == 1 ? axis(b, "j1", c) : 0.0;
  }
  return static_cast<double>(c);
}

/// The panel a coefficient belongs to when plotted against the coefficients.
std::string family(const Block& b, const Element& el) {
  const std::size_t c = el.coeff;
  const Quantity q = quantity(b, c);
  if (is_scattering(b) && std::lround(axis(b, "order", c)) == 2) {
    std::string s = q.symbol + "(j1 = " + std::to_string(std::lround(axis(b, "j1", c))) + ", j2)";
    const long l2 = el.average.empty() ? std::lround(axis(b, "l2", c)) : el.delta;
    return s + ((!el.average.empty() || attr(b, "reduce") == "rotation") ? ", δ = " : ", ℓ2 = ") + std::to_string(l2);
  }
  if (is_power(b)) return q.symbol + "(k)";
  if (is_scattering(b)) return q.symbol + (std::lround(axis(b, "order", c)) == 1 ? "(j)" : "");
  return b.kernel + ": " + q.symbol;
}

std::string default_select(const Catalogue& cat) {
  for (const char* k : {"power", "slice_power"})
    for (const auto& b : cat.blocks())
      if (b.kernel == k && is_power(b)) return std::string("kernel=") + k + (has(b, "quantity") ? ";quantity=1" : "");
  return "kernel=" + cat.blocks().front().kernel;
}

/// Removes a file when it goes out of scope (the plot's data file).
struct RemoveOnExit {
  std::string path;
  ~RemoveOnExit() {
    std::error_code ec;
    if (!path.empty()) std::filesystem::remove(path, ec);
  }
};

/// The entries drawn: the fiducial realisations (`fid` set), or every done entry of the roles asked.
std::vector<std::size_t> plot_entries(const Catalogue& cat, const PlotOptions& o, std::int64_t& fid) {
  const Design& des = cat.design();
  std::vector<std::size_t> entries;
  if (o.fiducial) {
    fid = detail::fiducial_point(cat, o.point);
    entries = detail::done_entries(cat, fid, o.allow_incomplete, "the fiducial point");
    if (entries.empty()) throw InputError(cat.path() + ": the fiducial point " + std::to_string(fid) + " has no done entries");
  } else {
    std::set<std::string> present;
    for (std::size_t e = 0; e < cat.entry_point().size(); ++e) {
      const auto& role = des.role[static_cast<std::size_t>(cat.entry_point()[e])];
      if (cat.entry_status()[e] != 1) continue;
      present.insert(role);
      if (std::find(o.roles.begin(), o.roles.end(), role) != o.roles.end()) entries.push_back(e);
    }
    if (entries.empty()) {
      std::string list;
      for (const auto& r : present) list += (list.empty() ? "" : ", ") + r;
      throw InputError("--role: no done entry of " + cat.path() + " has role " + [&] {
        std::string s;
        for (const auto& r : o.roles) s += (s.empty() ? "" : ", ") + r;
        return s;
      }() + " (done entries have roles: " + (list.empty() ? "none" : list) + ")");
    }
  }
  return entries;
}

/// Against the coefficients: keep, per kernel block, the unit nearest `at_z` (default: the middle
/// of the selected units).
void keep_nearest_units(const Catalogue& cat, Selection& sel, std::optional<double> at_z) {
  std::vector<double> zs;
  for (const auto& el : sel.elements) {
    const auto& b = cat.blocks()[el.block];
    if (b.unit_z.size() == b.n_units) zs.push_back(b.unit_z[el.unit]);
  }
  if (zs.empty()) throw InputError(cat.path() + ": the selected kernels have no unit_z, so --against coefficient cannot pick a redshift");
  std::sort(zs.begin(), zs.end());
  const double target = at_z ? *at_z : zs[zs.size() / 2];
  std::map<std::size_t, std::size_t> nearest;  // block → unit
  for (const auto& el : sel.elements) {
    const auto& b = cat.blocks()[el.block];
    auto [it, fresh] = nearest.try_emplace(el.block, el.unit);
    if (!fresh && std::abs(b.unit_z[el.unit] - target) < std::abs(b.unit_z[it->second] - target)) it->second = el.unit;
  }
  std::vector<Element> kept;
  for (const auto& el : sel.elements)
    if (nearest.at(el.block) == el.unit) kept.push_back(el);
  sel.elements = std::move(kept);
}

}  // namespace

void run_statistic_plot(const PlotOptions& o) {
  Catalogue cat(o.catalogue);
  const Design& des = cat.design();
  if (o.selects.size() > 1)
    throw InputError("spinflip plot takes one --select (scenarios are overlaid on the same panels); got " +
                     std::to_string(o.selects.size()));
  if (o.against != "z" && o.against != "coefficient")
    throw InputError("--against " + o.against + " is not allowed (allowed: z, coefficient)");
  std::string format = o.format;
  const std::string ext = std::filesystem::path(o.output).extension().string();
  if (format.empty()) format = ext == ".pdf" ? "pdf" : "png";
  if (format != "png" && format != "pdf")
    throw InputError("--format " + format + " is not allowed (allowed: png, pdf)");
  Selection sel = select(cat, o.selects.empty() ? default_select(cat) : o.selects.front(), 0);

  std::int64_t fid = -1;
  const std::vector<std::size_t> entries = plot_entries(cat, o, fid);
  std::size_t by = 0;
  if (!o.by.empty()) {
    auto it = std::find(des.names.begin(), des.names.end(), o.by);
    if (it == des.names.end()) {
      std::string list;
      for (const auto& n : des.names) list += (list.empty() ? "" : ", ") + n;
      throw InputError("--by " + o.by + " is not a parameter of " + cat.path() + " (parameters: " + list + ")");
    }
    by = static_cast<std::size_t>(it - des.names.begin());
  }
  if (des.names.empty() && !o.fiducial) throw InputError(cat.path() + " has no parameters to colour the design by");

  if (o.against == "coefficient") keep_nearest_units(cat, sel, o.at_z);

  // Panels and series: one panel per coefficient (against z) or per family
  // (against k or j); within a panel one series per scenario.
  std::vector<std::string> panel_title, panel_x, panel_y;
  std::vector<std::int64_t> panel_xlog;
  std::map<std::string, std::int64_t> panel_of;
  std::vector<std::int64_t> el_panel;
  std::vector<std::string> el_series;
  std::vector<double> el_x, el_z, el_freq;
  for (const auto& el : sel.elements) {
    const auto& b = cat.blocks()[el.block];
    const Quantity q = quantity(b, el.coeff);
    const double z = b.unit_z.size() == b.n_units ? b.unit_z[el.unit] : NAN;
    const double f = b.unit_freq_MHz.size() == b.n_units ? b.unit_freq_MHz[el.unit] : NAN;
    std::string key, title, xl;
    bool xlog = false;
    if (o.against == "z") {
      key = b.kernel + "|" + std::to_string(el.coeff) + "|" + std::to_string(el.delta);
      title = q.symbol + ", " + coefficient_text(b, el) + "  (" + b.kernel + ")";
      xl = "redshift z";
      el_x.push_back(z);
    } else {
      key = b.kernel + "|" + family(b, el);
      title = family(b, el) + " at z ≈ " + num(z) + "  (" + b.kernel + ")";
      xl = is_power(b) ? "k [Mpc⁻¹]" : is_scattering(b) ? (std::lround(axis(b, "order", el.coeff)) == 2 ? "j2" : "j")
                                                        : "coefficient";
      xlog = is_power(b);
      el_x.push_back(coefficient_x(b, el));
    }
    auto [it, fresh] = panel_of.try_emplace(key, static_cast<std::int64_t>(panel_title.size()));
    if (fresh) {
      panel_title.push_back(title);
      panel_x.push_back(xl);
      panel_y.push_back(q.label());
      panel_xlog.push_back(xlog);
    }
    el_panel.push_back(it->second);
    el_series.push_back(b.scenario);
    el_z.push_back(z);
    el_freq.push_back(f);
  }
  if (panel_title.size() > kMaxPanels)
    throw InputError("--select '" + sel.text + "' gives " + std::to_string(panel_title.size()) + " panels; at most " +
                     std::to_string(kMaxPanels) + " fit in one picture (narrow it, e.g. with quantity=1, k_mean=LO:HI, "
                     "order=1 or j1=0)");

  const Eigen::MatrixXd X = cat.load(sel, entries);
  const std::string output = o.output;
  // The numbers behind the picture: kept where --data asks, else a scratch file beside the output.
  const std::string data_path =
      o.data_output.empty() ? output + "." + std::to_string(::getpid()) + ".plotdata.h5" : o.data_output;
  RemoveOnExit cleanup{o.data_output.empty() ? data_path : std::string()};
  {
    h5::Id f = h5::create_file(data_path);
    h5::write_attr(f.get(), "mode", std::string(o.fiducial ? "fiducial" : "design"));
    h5::write_attr(f.get(), "against", o.against);
    h5::write_attr(f.get(), "format", format);
    std::string title = std::filesystem::path(cat.path()).filename().string() + ": ";
    if (o.fiducial)
      title += "fiducial point " + std::to_string(fid) + ", mean ± 1σ of " + std::to_string(entries.size()) + " realisations";
    else
      title += std::to_string(entries.size()) + " entries (" + [&] {
        std::string s;
        for (const auto& r : o.roles) s += (s.empty() ? "" : ", ") + r;
        return s;
      }() + ")";
    h5::write_attr(f.get(), "title", title);
    h5::write_attr(f.get(), "select", sel.text.empty() ? std::string("(default) ") + default_select(cat) : sel.text);
    std::vector<double> colour;
    for (auto e : entries) colour.push_back(des.names.empty() ? 0.0 : des.points(cat.entry_point()[e], static_cast<Eigen::Index>(by)));
    const std::size_t ne = entries.size(), nel = sel.elements.size(), np = panel_title.size();
    h5::write_doubles(f.get(), "colour", colour, {ne});
    h5::write_attr(f.get(), "colour_label",
                   des.names.empty() ? std::string() : (des.labels.empty() ? des.names[by] : des.labels[by]));
    h5::write_attr(f.get(), "colour_log", static_cast<std::int64_t>(!des.names.empty() && des.log[by]));
    h5::write_doubles(f.get(), "values", detail::flat(X), {ne, nel});
    h5::write_ints(f.get(), "element_panel", el_panel, {nel});
    h5::write_strings(f.get(), "element_series", el_series);
    h5::write_doubles(f.get(), "element_x", el_x, {nel});
    h5::write_doubles(f.get(), "element_z", el_z, {nel});
    h5::write_doubles(f.get(), "element_freq_MHz", el_freq, {nel});
    h5::write_strings(f.get(), "panel_title", panel_title);
    h5::write_strings(f.get(), "panel_xlabel", panel_x);
    h5::write_strings(f.get(), "panel_ylabel", panel_y);
    h5::write_ints(f.get(), "panel_xlog", panel_xlog, {np});
    std::vector<std::int64_t> ent(entries.begin(), entries.end()), el_unit, el_coeff;
    for (const auto& el : sel.elements) {
      el_unit.push_back(static_cast<std::int64_t>(el.unit));
      el_coeff.push_back(static_cast<std::int64_t>(el.coeff));
    }
    h5::write_ints(f.get(), "entries", ent, {ne});
    h5::write_ints(f.get(), "element_unit", el_unit, {nel});
    h5::write_ints(f.get(), "element_coeff", el_coeff, {nel});
    std::vector<std::string> el_kernel;
    for (const auto& el : sel.elements) el_kernel.push_back(cat.blocks()[el.block].kernel);
    h5::write_strings(f.get(), "element_kernel", el_kernel);
  }
  if (!detail::run_plot("plot_statistic.py", {data_path, output, format}))
    throw IoError("the picture " + output + " was not drawn (see the warning above)");
  std::printf("%s: %zu panels, %zu entries, selection '%s' -> wrote %s\n", cat.path().c_str(), panel_title.size(),
              entries.size(), sel.text.empty() ? default_select(cat).c_str() : sel.text.c_str(), output.c_str());
  std::fflush(stdout);
}

}  // namespace spinflip::analysis
