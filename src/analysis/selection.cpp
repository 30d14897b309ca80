// The --select syntax (docs/analysis.md): terms `key=value` separated by ';'.
//   name=LABEL  kernel=K[,K]  scenario=S[,S]  freq=LO:HI  z=LO:HI  unit=I[,I]|LO:HI
//   every=N  <axis>=V[,V]|LO:HI   (any coefficient axis: order, j1, k_mean, n_modes, …)
//   above_wedge=SCENARIO   (cylindrical scattering: filters above that scenario's wedge line)
#include <algorithm>
#include <array>
#include <map>
#include <cmath>
#include <cstdlib>
#include <functional>
#include <limits>
#include <optional>
#include <set>
#include <sstream>

#include "analysis/analysis.hpp"
#include "analysis/internal.hpp"
#include "core/errors.hpp"

namespace spinflip::analysis {
namespace {

std::string trim(const std::string& s) {
  const auto a = s.find_first_not_of(" \t");
  if (a == std::string::npos) return {};
  return s.substr(a, s.find_last_not_of(" \t") - a + 1);
}

std::vector<std::string> split(const std::string& s, char sep) {
  std::vector<std::string> out;
  std::stringstream ss(s);
  std::string part;
  while (std::getline(ss, part, sep)) out.push_back(trim(part));
  return out;
}

std::string join(const std::vector<std::string>& v, const std::string& sep = ", ") {
  std::string out;
  for (std::size_t i = 0; i < v.size(); ++i) out += (i ? sep : "") + v[i];
  return out;
}

/// A value filter: an inclusive range (open ends allowed) or a list of values.
struct Filter {
  std::string key;
  std::optional<double> lo, hi;
  std::vector<double> values;
  bool is_range = false;
  bool accepts(double v) const {
    if (is_range) return (!lo || v >= *lo) && (!hi || v <= *hi);
    return std::any_of(values.begin(), values.end(),
                       [&](double a) { return std::abs(v - a) <= 1e-9 * std::max(1.0, std::abs(a)); });
  }
};

double number(const std::string& text, const std::string& key, const std::string& sel) {
  char* end = nullptr;
  const double v = std::strtod(text.c_str(), &end);
  if (text.empty() || end != text.c_str() + text.size() || !std::isfinite(v))
    throw InputError("--select '" + sel + "': " + key + "=" + text + " is not a number (ranges are LO:HI, lists V1,V2)");
  return v;
}

Filter parse_filter(const std::string& key, const std::string& value, const std::string& sel) {
  Filter f;
  f.key = key;
  if (value.find(':') != std::string::npos) {
    // Either side may be empty (an open range, e.g. n_modes=1:); split() would drop a trailing one.
    const auto colon = value.find(':');
    const std::vector<std::string> parts{value.substr(0, colon), value.substr(colon + 1)};
    if (value.find(':', colon + 1) != std::string::npos)
      throw InputError("--select '" + sel + "': " + key + "=" + value + " is not a range LO:HI");
    f.is_range = true;
    if (!parts[0].empty()) f.lo = number(parts[0], key, sel);
    if (!parts[1].empty()) f.hi = number(parts[1], key, sel);
  } else {
    for (const auto& p : split(value, ',')) f.values.push_back(number(p, key, sel));
    if (f.values.empty()) throw InputError("--select '" + sel + "': " + key + "= needs a value");
  }
  return f;
}

}  // namespace

Selection select(const Catalogue& catalogue, const std::string& text, std::size_t index) {
  const auto& blocks = catalogue.blocks();
  std::set<std::string> all_kernels, all_scenarios;
  for (const auto& b : blocks) {
    all_kernels.insert(b.kernel);
    all_scenarios.insert(b.scenario);
  }
  Selection sel;
  sel.text = trim(text);
  std::vector<std::string> kernels, scenarios;
  std::optional<Filter> freq, z, unit;
  std::size_t every = 1;
  bool rotation = false;
  std::optional<detail::WedgeLine> wedge;
  std::vector<Filter> axis_filters;
  std::vector<std::string> described;
  for (const auto& term : split(text, ';')) {
    if (term.empty()) continue;
    const auto eq = term.find('=');
    if (eq == std::string::npos)
      throw InputError("--select '" + text + "': term '" + term +
                       "' is not key=value (keys: name, kernel, scenario, freq, z, unit, every, reduce, above_wedge, or a coefficient "
                       "axis)");
    const std::string key = trim(term.substr(0, eq)), value = trim(term.substr(eq + 1));
    if (key == "name") {
      if (value.empty() || value.find('/') != std::string::npos)
        throw InputError("--select '" + text + "': name='" + value + "' must be non-empty and without '/'");
      sel.name = value;
      continue;
    }
    described.push_back(term);
    if (key == "kernel" || key == "scenario") {
      auto& list = key == "kernel" ? kernels : scenarios;
      const auto& allowed = key == "kernel" ? all_kernels : all_scenarios;
      for (const auto& v : split(value, ',')) {
        if (!allowed.count(v))
          throw InputError("--select '" + text + "': unknown " + key + " '" + v + "' in " + catalogue.path() +
                           " (allowed: " + join({allowed.begin(), allowed.end()}) + ")");
        list.push_back(v);
      }
    } else if (key == "freq") {
      freq = parse_filter(key, value, text);
    } else if (key == "z") {
      z = parse_filter(key, value, text);
    } else if (key == "unit") {
      unit = parse_filter(key, value, text);
    } else if (key == "above_wedge") {
      if (!all_scenarios.count(value))
        throw InputError("--select '" + text + "': above_wedge=" + value + " is not a scenario of " + catalogue.path() +
                         " (allowed: " + join({all_scenarios.begin(), all_scenarios.end()}) + ")");
      wedge.emplace(catalogue, value);
    } else if (key == "reduce") {
      if (value != "rotation" && value != "none")
        throw InputError("--select '" + text + "': reduce=" + value + " is not allowed (allowed: rotation, none)");
      rotation = value == "rotation";
    } else if (key == "every") {
      const double v = number(value, key, text);
      if (v < 1 || v != std::floor(v) || v > 1e9)
        throw InputError("--select '" + text + "': every=" + value + " must be a whole number ≥ 1");
      every = static_cast<std::size_t>(v);
    } else {
      axis_filters.push_back(parse_filter(key, value, text));
    }
  }
  if (sel.name.empty()) {
    sel.name = described.empty() ? "all" : join(described, " ");
    if (sel.name.size() > 48) sel.name = "sel" + std::to_string(index + 1);
  }

  std::set<std::string> axes_seen;
  std::vector<std::size_t> chosen;
  for (std::size_t b = 0; b < blocks.size(); ++b) {
    const auto& blk = blocks[b];
    if (!kernels.empty() && std::find(kernels.begin(), kernels.end(), blk.kernel) == kernels.end()) continue;
    if (!scenarios.empty() && std::find(scenarios.begin(), scenarios.end(), blk.scenario) == scenarios.end()) continue;
    chosen.push_back(b);
    for (const auto& [name, v] : blk.axes) axes_seen.insert(name);
  }
  for (const auto& f : axis_filters)
    if (!axes_seen.count(f.key))
      throw InputError("--select '" + text + "': '" + f.key +
                       "' is neither a selection key (name, kernel, scenario, freq, z, unit, every, reduce, above_wedge) nor a coefficient "
                       "axis of the selected kernels (axes: " + join({axes_seen.begin(), axes_seen.end()}) + ")");
  std::size_t rotated = 0;
  for (std::size_t b : chosen) {
    const auto& blk = blocks[b];
    std::vector<std::size_t> units;
    for (std::size_t u = 0; u < blk.n_units; ++u) {
      auto need = [&](const std::vector<double>& axis, const char* what) {
        if (axis.size() != blk.n_units)
          throw InputError(catalogue.path() + ": /stats/" + blk.scenario + "/" + blk.kernel + " has no " + what +
                           " dataset, so --select '" + text + "' cannot filter it");
        return axis[u];
      };
      if (freq && !freq->accepts(need(blk.unit_freq_MHz, "unit_freq_MHz"))) continue;
      if (z && !z->accepts(need(blk.unit_z, "unit_z"))) continue;
      if (unit && !unit->accepts(static_cast<double>(u))) continue;
      units.push_back(u);
    }
    std::vector<std::size_t> coeffs;
    for (std::size_t c = 0; c < blk.n_coeff; ++c) {
      bool ok = true;
      for (const auto& f : axis_filters) {
        auto it = blk.axes.find(f.key);
        if (it != blk.axes.end() && !f.accepts(it->second[c])) ok = false;
      }
      if (ok) coeffs.push_back(c);
    }
    // reduce=rotation on a kernel stored per orientation: S1(j) = mean over ℓ,
    // S2(j1, j2, δ) = mean over ℓ1 at ℓ2 = (ℓ1 + δ) mod L (DESIGN.md §6).
    std::vector<Element> proto;
    const bool per_orientation = blk.axes.count("order") && blk.axes.count("j1") && blk.axes.count("l1") &&
                                 blk.axes.count("j2") && blk.axes.count("l2") &&
                                 (blk.attrs.count("reduce") == 0 || blk.attrs.at("reduce") != "rotation");
    if (rotation && per_orientation) {
      ++rotated;
      const auto &order = blk.axes.at("order"), &j1 = blk.axes.at("j1"), &l1 = blk.axes.at("l1"),
                 &j2 = blk.axes.at("j2"), &l2 = blk.axes.at("l2");
      std::set<long> orientations;
      for (std::size_t c = 0; c < blk.n_coeff; ++c)
        if (order[c] == 1 && l1[c] >= 0) orientations.insert(std::lround(l1[c]));
      const long L = std::max<long>(static_cast<long>(orientations.size()), 1);
      std::map<std::array<long, 4>, std::size_t> slot;
      for (std::size_t c : coeffs) {
        const long o = std::lround(order[c]);
        const long delta = o == 2 ? ((std::lround(l2[c]) - std::lround(l1[c])) % L + L) % L : -1;
        const std::array<long, 4> key{o, o >= 1 ? std::lround(j1[c]) : -1, o == 2 ? std::lround(j2[c]) : -1, delta};
        auto [it, fresh] = slot.try_emplace(key, proto.size());
        if (fresh) proto.push_back({b, 0, c, {}, delta});
        proto[it->second].average.push_back(c);
      }
    } else {
      for (std::size_t c : coeffs) proto.push_back({b, 0, c});
    }
    // above_wedge: a coefficient is kept at a unit when its filter's centre (ξ_j, η_m)/Δ lies on or above the
    // wedge line at the unit's redshift; S0 (the k = 0 mode) never is; S2 is judged by its first filter
    // (j1, m1), because the chunk enters S2 only through x⋆ψ_{j1,m1} (docs/analysis.md).
    std::function<bool(std::size_t, std::size_t)> keep = [](std::size_t, std::size_t) { return true; };
    if (wedge) {
      const bool filters = blk.axes.count("order") && blk.axes.count("j1") && blk.axes.count("m1") &&
                           blk.attrs.count("xi0") && blk.attrs.count("eta0");
      if (!filters)
        throw InputError("--select '" + text + "': above_wedge applies to cylindrical scattering (kernel=scattering3d), "
                         "whose filters have (k_perp, k_par) centres; " + blk.scenario + "/" + blk.kernel +
                         " has none (add kernel=scattering3d)");
      const double xi0 = number(blk.attrs.at("xi0"), "xi0", text), eta0 = number(blk.attrs.at("eta0"), "eta0", text);
      keep = [&, xi0, eta0](std::size_t u, std::size_t c) {
        if (blk.unit_z.size() != blk.n_units)
          throw InputError(catalogue.path() + ": /stats/" + blk.scenario + "/" + blk.kernel +
                           " has no unit_z dataset, so above_wedge cannot place its units");
        if (std::lround(blk.axes.at("order")[c]) == 0) return false;
        const double kperp = xi0 * std::pow(2.0, -blk.axes.at("j1")[c]) / wedge->cell_mpc;
        const double kpar = eta0 * std::pow(2.0, -blk.axes.at("m1")[c]) / wedge->cell_mpc;
        return wedge->above(kperp, kpar, blk.unit_z[u]);
      };
    }
    for (std::size_t k = 0; k < units.size(); k += every)
      for (auto el : proto) {
        if (!keep(units[k], el.coeff)) continue;
        el.unit = units[k];
        sel.elements.push_back(std::move(el));
      }
  }
  if (rotation && rotated == 0)
    throw InputError("--select '" + text + "': reduce=rotation needs a scattering kernel stored per orientation "
                     "(axes order, j1, l1, j2, l2 and reduce = \"none\") among the selected kernels");
  if (sel.elements.empty())
    throw InputError("--select '" + text + "' matches no coefficient in " + catalogue.path() +
                     " (kernels: " + join({all_kernels.begin(), all_kernels.end()}) +
                     "; scenarios: " + join({all_scenarios.begin(), all_scenarios.end()}) + ")");
  return sel;
}

std::vector<std::string> element_labels(const Catalogue& catalogue, const Selection& selection) {
  std::vector<std::string> out;
  out.reserve(selection.elements.size());
  for (const auto& el : selection.elements) {
    const auto& blk = catalogue.blocks()[el.block];
    std::ostringstream os;
    os.precision(6);
    os << blk.scenario << "/" << blk.kernel << " u" << el.unit;
    if (blk.unit_freq_MHz.size() == blk.n_units) os << " f=" << blk.unit_freq_MHz[el.unit] << "MHz";
    if (blk.unit_z.size() == blk.n_units) os << " z=" << blk.unit_z[el.unit];
    for (const auto& [name, v] : blk.axes) {
      if (!el.average.empty() && name == "l1") os << " l1=-1";
      else if (!el.average.empty() && name == "l2") os << " l2=" << el.delta;
      else os << " " << name << "=" << v[el.coeff];
    }
    if (el.average.size() > 1) os << " (rotation mean of " << el.average.size() << ")";
    out.push_back(os.str());
  }
  return out;
}

std::string selection_record(const Catalogue& catalogue, const Selection& selection) {
  std::ostringstream os;
  os << "selection '" << selection.name << "' (--select '" << selection.text << "'): "
     << selection.elements.size() << " coefficients\n";
  std::size_t i = 0;
  const auto& els = selection.elements;
  while (i < els.size()) {
    const std::size_t b = els[i].block;
    std::set<std::size_t> units, coeffs;
    std::size_t n = 0;
    for (; i < els.size() && els[i].block == b; ++i, ++n) {
      units.insert(els[i].unit);
      coeffs.insert(els[i].coeff);
    }
    const auto& blk = catalogue.blocks()[b];
    os << "  " << blk.scenario << "/" << blk.kernel << ": " << n << " values = " << units.size() << " "
       << (blk.unit_kind.empty() ? "unit" : blk.unit_kind) << "s [";
    std::size_t k = 0;
    for (auto u : units) os << (k++ ? "," : "") << u;
    os << "] x " << coeffs.size() << " of " << blk.n_coeff << " coefficients\n";
  }
  for (const auto& note : selection.notes) os << "  note: " << note << "\n";
  return os.str();
}

Transform parse_transform(const std::string& text) {
  if (text == "none" || text.empty()) return Transform::none;
  if (text == "log") return Transform::log;
  if (text == "standardise" || text == "standardize") return Transform::standardise;
  throw InputError("--transform '" + text + "' is not allowed (allowed: none, log, standardise)");
}

}  // namespace spinflip::analysis
