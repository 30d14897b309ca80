#include "campaign/designs.hpp"

#include <algorithm>
#include <array>
#include <bit>
#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <fstream>
#include <map>
#include <sstream>

#include "core/errors.hpp"

namespace spinflip::campaign {

namespace {

// Sobol direction numbers: Joe & Kuo (2008), "Constructing Sobol sequences with better
// two-dimensional projections", SIAM J. Sci. Comput. 30, 2635; their table
// new-joe-kuo-6.21201, dimensions 2..21: degree s of the primitive polynomial, its
// interior coefficients a (as bits), and the initial direction integers m_1..m_s.
// Dimension 1 is the van der Corput sequence (all m_k = 1).
struct JoeKuo {
  unsigned s, a;
  std::array<std::uint32_t, 7> m;
};
constexpr std::array<JoeKuo, 20> joe_kuo{{
    {1, 0, {1}},
    {2, 1, {1, 3}},
    {3, 1, {1, 3, 1}},
    {3, 2, {1, 1, 1}},
    {4, 1, {1, 1, 3, 3}},
    {4, 4, {1, 3, 5, 13}},
    {5, 2, {1, 1, 5, 5, 17}},
    {5, 4, {1, 1, 5, 5, 5}},
    {5, 7, {1, 1, 7, 11, 19}},
    {5, 11, {1, 1, 5, 1, 1}},
    {5, 13, {1, 1, 1, 3, 11}},
    {5, 14, {1, 3, 5, 5, 31}},
    {6, 1, {1, 3, 3, 9, 7, 49}},
    {6, 13, {1, 1, 1, 15, 21, 21}},
    {6, 16, {1, 3, 1, 13, 27, 49}},
    {6, 19, {1, 1, 1, 15, 7, 5}},
    {6, 22, {1, 3, 1, 15, 13, 25}},
    {6, 25, {1, 1, 5, 5, 19, 61}},
    {7, 1, {1, 3, 7, 11, 23, 15, 103}},
    {7, 4, {1, 3, 7, 13, 13, 15, 69}},
}};

constexpr unsigned sobol_bits = 32;  // points are multiples of 2^-32 (enough for 2^32 points)

// V_k (k = 1..32) of one dimension as 32-bit integers (V_k = m_k 2^(32-k)),
// by the recurrence of Bratley & Fox (1988) as written by Joe & Kuo (2008) eq. (3).
std::array<std::uint32_t, sobol_bits> direction_numbers(std::size_t dim) {
  std::array<std::uint32_t, sobol_bits> v{};
  if (dim == 0) {
    for (unsigned k = 0; k < sobol_bits; ++k) v[k] = 1u << (sobol_bits - 1 - k);
    return v;
  }
  const JoeKuo& jk = joe_kuo[dim - 1];
  std::array<std::uint64_t, sobol_bits> m{};
  for (unsigned k = 0; k < jk.s; ++k) m[k] = jk.m[k];
  for (unsigned k = jk.s; k < sobol_bits; ++k) {
    std::uint64_t x = m[k - jk.s] ^ (m[k - jk.s] << jk.s);
    for (unsigned i = 1; i < jk.s; ++i)
      if ((jk.a >> (jk.s - 1 - i)) & 1u) x ^= m[k - i] << i;
    m[k] = x;
  }
  for (unsigned k = 0; k < sobol_bits; ++k) v[k] = static_cast<std::uint32_t>(m[k] << (sobol_bits - 1 - k));
  return v;
}

// y = L x with L lower triangular with unit diagonal over GF(2), digit 0 the most
// significant bit; row i of L is mask[i] (bits of digits 0..i).
std::uint32_t apply_lower_triangular(const std::array<std::uint32_t, sobol_bits>& mask, std::uint32_t x) {
  std::uint32_t y = 0;
  for (unsigned i = 0; i < sobol_bits; ++i)
    if (std::popcount(x & mask[i]) & 1) y |= 1u << (sobol_bits - 1 - i);
  return y;
}

std::string join(const std::vector<std::string>& names) {
  std::string s;
  for (std::size_t i = 0; i < names.size(); ++i) s += (i ? ", " : "") + names[i];
  return s;
}

std::string number_text(double v) {
  std::ostringstream os;
  os.precision(10);
  os << v;
  return os.str();
}

// Is v allowed for the key the parameter sets (its declared range)?
std::string range_problem(const core::Config& cfg, const Parameter& p, double v) {
  const core::KeySpec* spec = cfg.schema().find(p.key_path);
  if (!spec) return {};
  bool low = spec->min && (spec->min_exclusive ? v <= *spec->min : v < *spec->min);
  bool high = spec->max && v > *spec->max;
  if (!std::isfinite(v) || low || high) return p.key_path + " allows " + spec->allowed_text();
  return {};
}

std::string trim(std::string s) {
  const auto a = s.find_first_not_of(" \t\r\n");
  if (a == std::string::npos) return {};
  const auto b = s.find_last_not_of(" \t\r\n");
  s = s.substr(a, b - a + 1);
  if (s.size() >= 2 && s.front() == '"' && s.back() == '"') s = s.substr(1, s.size() - 2);
  return s;
}

std::vector<std::string> split_csv(const std::string& line) {
  std::vector<std::string> out;
  std::stringstream ss(line);
  std::string field;
  while (std::getline(ss, field, ',')) out.push_back(trim(field));
  if (!line.empty() && line.back() == ',') out.emplace_back();
  return out;
}

}  // namespace

UnitPoints latin_hypercube(std::size_t n, std::size_t d, bool scramble, const rng::CounterRng& rng) {
  UnitPoints out(n * d);
  std::vector<std::size_t> perm(n);
  for (std::size_t j = 0; j < d; ++j) {
    for (std::size_t i = 0; i < n; ++i) perm[i] = i;
    // Fisher–Yates with uniforms keyed by (dimension, position): lane 0 permutes, lane 1 places.
    for (std::size_t i = n; i-- > 1;) {
      const double u = 1.0 - rng.uniform(static_cast<std::uint64_t>(j * n + i), 0);  // [0, 1)
      const auto r = std::min(static_cast<std::size_t>(u * static_cast<double>(i + 1)), i);
      std::swap(perm[i], perm[r]);
    }
    for (std::size_t i = 0; i < n; ++i) {
      const double offset = scramble ? 1.0 - rng.uniform(static_cast<std::uint64_t>(j * n + i), 1) : 0.5;
      out[i * d + j] = (static_cast<double>(perm[i]) + offset) / static_cast<double>(n);
    }
  }
  return out;
}

std::size_t sobol_max_dimension() { return joe_kuo.size() + 1; }

UnitPoints sobol(std::size_t n, std::size_t d, bool scramble, const rng::CounterRng& rng) {
  if (d > sobol_max_dimension())
    throw InternalError("sobol: " + std::to_string(d) + " dimensions asked, direction numbers for " +
                        std::to_string(sobol_max_dimension()));
  if (n > (std::uint64_t{1} << sobol_bits)) throw InternalError("sobol: more than 2^32 points asked");
  UnitPoints out(n * d);
  const double scale = std::ldexp(1.0, -static_cast<int>(sobol_bits));
  for (std::size_t j = 0; j < d; ++j) {
    auto v = direction_numbers(j);
    std::uint32_t x = 0;
    if (scramble) {
      // Random rows of L below the diagonal (digits more significant than i), then the shift.
      std::array<std::uint32_t, sobol_bits> mask{};
      for (unsigned i = 0; i < sobol_bits; ++i) {
        const auto r = static_cast<std::uint32_t>(rng.bits(static_cast<std::uint64_t>(j) * 64 + i)[0] >> 32);
        const std::uint32_t above = i == 0 ? 0u : ~0u << (sobol_bits - i);
        mask[i] = (r & above) | (1u << (sobol_bits - 1 - i));
      }
      for (auto& vk : v) vk = apply_lower_triangular(mask, vk);
      x = static_cast<std::uint32_t>(rng.bits(static_cast<std::uint64_t>(j) * 64 + sobol_bits)[0] >> 32);
    }
    // Gray-code order (Antonov & Saleev 1979): point i = point i-1 XOR V_c, c = lowest zero bit of i-1.
    for (std::size_t i = 0; i < n; ++i) {
      if (i > 0) x ^= v[static_cast<std::size_t>(std::countr_one(static_cast<std::uint64_t>(i - 1)))];
      out[i * d + j] = static_cast<double>(x) * scale;
    }
  }
  return out;
}

double to_physical(const Parameter& p, double u) {
  if (p.log) {
    const double a = std::log10(p.min), b = std::log10(p.max);
    return std::clamp(std::pow(10.0, a + u * (b - a)), p.min, p.max);
  }
  return p.min + u * (p.max - p.min);
}

DesignBlock build_design(const core::Config& cfg, std::size_t index, const std::vector<Parameter>& params,
                         std::int64_t fiducial_point, std::size_t first_point) {
  const std::string base = "designs." + std::to_string(index) + ".";
  auto key = [&](const char* leaf) { return base + leaf; };
  DesignBlock block;
  block.kind = cfg.string(key("kind"));
  block.name = cfg.string(key("name"));
  if (block.name.empty()) block.name = block.kind;
  block.realisations = static_cast<std::size_t>(cfg.integer(key("realisations")));
  const std::size_t d = params.size();

  // Keys a kind does not read are refused, so a typo'd design does not run silently.
  static const std::map<std::string, std::vector<std::string>> used = {
      {"latin_hypercube", {"points", "scramble"}}, {"sobol", {"points", "scramble"}},
      {"grid", {"points_per_dim"}},                {"fiducial", {}},
      {"stencil", {"parameters", "step_factors"}}, {"list", {"file"}}};
  const auto& mine = used.at(block.kind);
  for (const char* leaf : {"points", "scramble", "points_per_dim", "parameters", "step_factors", "file"})
    if (cfg.has(key(leaf)) && std::find(mine.begin(), mine.end(), leaf) == mine.end())
      cfg.fail(key(leaf), "is not used by kind = \"" + block.kind + "\"" +
                              (mine.empty() ? std::string() : " (it reads: " + join(mine) + ")"));
  if (d == 0 && block.kind != "fiducial")
    cfg.fail(key("kind"), "kind = \"" + block.kind + "\" needs at least one [parameters.<name>] table");

  auto point_at = [&](std::vector<double> values, Role role) {
    DesignPoint p;
    p.values = std::move(values);
    p.role = role;
    p.design_index = static_cast<int>(index);
    p.seed_point = first_point + block.points.size();
    return p;
  };
  std::vector<double> fiducial(d);
  for (std::size_t j = 0; j < d; ++j) fiducial[j] = params[j].fiducial;

  if (block.kind == "latin_hypercube" || block.kind == "sobol") {
    const auto n = static_cast<std::size_t>(cfg.integer(key("points")));
    if (n == 0) cfg.fail(key("points"), "kind = \"" + block.kind + "\" needs points = <number of points> ≥ 1");
    if (block.kind == "sobol" && d > sobol_max_dimension())
      cfg.fail(key("kind"), "sobol has direction numbers for at most " + std::to_string(sobol_max_dimension()) +
                                " parameters, the campaign varies " + std::to_string(d) +
                                " (use latin_hypercube)");
    const bool scramble = cfg.boolean(key("scramble"));
    // Scrambling is keyed by (campaign seed, design block) on its own stream (DESIGN.md §3).
    const rng::CounterRng rng({static_cast<std::uint64_t>(cfg.integer("campaign.seed")), index, 0},
                              rng::Stream::design_scramble);
    const UnitPoints u = block.kind == "sobol" ? sobol(n, d, scramble, rng) : latin_hypercube(n, d, scramble, rng);
    for (std::size_t i = 0; i < n; ++i) {
      std::vector<double> v(d);
      for (std::size_t j = 0; j < d; ++j) v[j] = to_physical(params[j], u[i * d + j]);
      block.points.push_back(point_at(std::move(v), Role::training));
    }
  } else if (block.kind == "grid") {
    const auto per = cfg.integers(key("points_per_dim"));
    if (per.size() != 1 && per.size() != d)
      cfg.fail(key("points_per_dim"), "needs one count for every parameter or one for all: " + std::to_string(d) +
                                          " parameters (" + [&] {
                                            std::vector<std::string> n;
                                            for (auto& p : params) n.push_back(p.name);
                                            return join(n);
                                          }() + ")");
    std::vector<std::size_t> counts(d);
    double total = 1;
    for (std::size_t j = 0; j < d; ++j) {
      counts[j] = static_cast<std::size_t>(per.size() == 1 ? per[0] : per[j]);
      total *= static_cast<double>(counts[j]);
    }
    if (total > 1e8) cfg.fail(key("points_per_dim"), "makes " + number_text(total) + " points, more than 1e8");
    // C order: the last parameter varies fastest. One point along a dimension sits at the fiducial.
    std::vector<std::size_t> idx(d, 0);
    for (std::size_t n = 0; n < static_cast<std::size_t>(total); ++n) {
      std::vector<double> v(d);
      for (std::size_t j = 0; j < d; ++j)
        v[j] = counts[j] == 1 ? params[j].fiducial
                              : to_physical(params[j], static_cast<double>(idx[j]) / static_cast<double>(counts[j] - 1));
      block.points.push_back(point_at(std::move(v), Role::training));
      for (std::size_t j = d; j-- > 0;) {
        if (++idx[j] < counts[j]) break;
        idx[j] = 0;
      }
    }
  } else if (block.kind == "fiducial") {
    block.points.push_back(point_at(fiducial, Role::fiducial));
  } else if (block.kind == "stencil") {
    if (fiducial_point < 0)
      cfg.fail(key("kind"), "a stencil shares the realisation seeds of the fiducial point: put a "
                            "[[designs]] block with kind = \"fiducial\" before it");
    std::vector<std::size_t> chosen;
    const auto names = cfg.strings(key("parameters"));
    if (names.empty()) {
      for (std::size_t j = 0; j < d; ++j) chosen.push_back(j);
    } else {
      std::vector<std::string> all;
      for (auto& p : params) all.push_back(p.name);
      for (const auto& name : names) {
        auto it = std::find(all.begin(), all.end(), name);
        if (it == all.end())
          cfg.fail(key("parameters"), "\"" + name + "\" is not a campaign parameter: allowed " + join(all));
        const auto j = static_cast<std::size_t>(it - all.begin());
        if (std::find(chosen.begin(), chosen.end(), j) != chosen.end())
          cfg.fail(key("parameters"), "\"" + name + "\" is listed twice");
        chosen.push_back(j);
      }
    }
    const auto factors = cfg.reals(key("step_factors"));
    if (factors.empty()) cfg.fail(key("step_factors"), "needs at least one factor (e.g. [1.0])");
    for (std::size_t s = 0; s < factors.size(); ++s)
      for (std::size_t j : chosen) {
        const Parameter& p = params[j];
        const std::string step_key = "parameters." + p.name + ".step";
        if (!p.step_absolute && p.fiducial == 0.0)
          cfg.fail(step_key, "a relative step of a zero fiducial is zero: set parameters." + p.name +
                                 ".step_absolute = true");
        const double h = p.step * factors[s] * (p.step_absolute ? 1.0 : std::abs(p.fiducial));
        for (int sign : {+1, -1}) {
          std::vector<double> v = fiducial;
          v[j] += sign * h;
          if (auto problem = range_problem(cfg, p, v[j]); !problem.empty())
            cfg.fail(step_key, "the stencil point " + p.name + " = " + number_text(v[j]) +
                                   " (step factor " + number_text(factors[s]) + ") is outside what " + problem);
          DesignPoint pt = point_at(std::move(v), sign > 0 ? Role::stencil_plus : Role::stencil_minus);
          pt.stencil_param = static_cast<int>(j);
          pt.stencil_step = sign * h;
          pt.stencil_step_index = static_cast<int>(s);
          pt.seed_point = static_cast<std::size_t>(fiducial_point);  // DESIGN.md §3
          block.points.push_back(std::move(pt));
        }
      }
  } else if (block.kind == "list") {
    const std::string file = cfg.string(key("file"));
    if (file.empty()) cfg.fail(key("kind"), "kind = \"list\" needs file = \"<points.csv>\"");
    std::filesystem::path path(file);
    if (path.is_relative()) path = cfg.directory() / path;
    std::ifstream in(path);
    if (!in) cfg.fail(key("file"), "cannot open " + path.string() + " (does it exist and is it readable?)");
    const std::string shown = path.string();
    std::vector<std::string> all;
    for (auto& p : params) all.push_back(p.name);
    std::vector<std::size_t> column_param;  // parameter index of each column
    std::string line;
    std::size_t line_no = 0;
    bool have_header = false;
    while (std::getline(in, line)) {
      ++line_no;
      const std::string t = trim(line);
      if (t.empty() || t[0] == '#') continue;
      const std::string where = shown + ":" + std::to_string(line_no) + ": ";
      auto fields = split_csv(t);
      if (!have_header) {
        have_header = true;
        for (const auto& name : fields) {
          auto it = std::find(all.begin(), all.end(), name);
          if (it == all.end())
            throw ConfigError(where + "column \"" + name + "\" is not a campaign parameter: allowed " + join(all));
          const auto j = static_cast<std::size_t>(it - all.begin());
          if (std::find(column_param.begin(), column_param.end(), j) != column_param.end())
            throw ConfigError(where + "column \"" + name + "\" appears twice");
          column_param.push_back(j);
        }
        if (column_param.size() != d) {
          std::vector<std::string> missing;
          for (std::size_t j = 0; j < d; ++j)
            if (std::find(column_param.begin(), column_param.end(), j) == column_param.end()) missing.push_back(all[j]);
          throw ConfigError(where + "the header needs a column for every parameter; missing: " + join(missing));
        }
        continue;
      }
      if (fields.size() != d)
        throw ConfigError(where + "row has " + std::to_string(fields.size()) + " fields, the header has " +
                          std::to_string(d));
      std::vector<double> v(d);
      for (std::size_t c = 0; c < d; ++c) {
        const std::string& f = fields[c];
        char* end = nullptr;
        const double x = f.empty() ? NAN : std::strtod(f.c_str(), &end);
        if (f.empty() || *end != '\0' || !std::isfinite(x))
          throw ConfigError(where + "column \"" + all[column_param[c]] + "\": \"" + f + "\" is not a finite number");
        if (auto problem = range_problem(cfg, params[column_param[c]], x); !problem.empty())
          throw ConfigError(where + "column \"" + all[column_param[c]] + "\": " + number_text(x) +
                            " is outside what " + problem);
        v[column_param[c]] = x;
      }
      block.points.push_back(point_at(std::move(v), Role::list));
    }
    if (!have_header) throw ConfigError(shown + ": empty point list (expected a header of parameter names)");
    if (block.points.empty()) throw ConfigError(shown + ": the point list has a header but no rows");
  }
  return block;
}

}  // namespace spinflip::campaign
