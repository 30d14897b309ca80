// Manifests: a CSV file (header row of column names) or a TOML file of [[cone]]
// tables. Every row problem is collected, one line each, so a user fixes them
// all in one pass.
#include <algorithm>
#include <charconv>
#include <cmath>
#include <fstream>
#include <map>
#include <sstream>
#include <toml++/toml.h>

#include "core/errors.hpp"
#include "core/printable.hpp"
#include "ingest/internal.hpp"

namespace spinflip::ingest {
namespace {

const std::vector<std::string> kRoles{"training", "fiducial", "stencil+", "stencil-", "list"};

std::string trim(const std::string& s) {
  const auto a = s.find_first_not_of(" \t\r\n"), b = s.find_last_not_of(" \t\r\n");
  return a == std::string::npos ? "" : s.substr(a, b - a + 1);
}

/// Split one CSV line; double quotes protect commas ("" is a quote).
std::vector<std::string> split_csv(const std::string& line, bool& unbalanced) {
  std::vector<std::string> out;
  std::string cur;
  bool quoted = false;
  for (std::size_t i = 0; i < line.size(); ++i) {
    const char c = line[i];
    if (quoted) {
      if (c == '"' && i + 1 < line.size() && line[i + 1] == '"') cur += '"', ++i;
      else if (c == '"') quoted = false;
      else cur += c;
    } else if (c == '"') {
      quoted = true;
    } else if (c == ',') {
      out.push_back(trim(cur));
      cur.clear();
    } else {
      cur += c;
    }
  }
  out.push_back(trim(cur));
  unbalanced = quoted;
  return out;
}

bool parse_real(const std::string& s, double& v) {
  if (s.empty()) return false;
  const char* end = s.data() + s.size();
  auto [p, ec] = std::from_chars(s.data(), end, v);
  return ec == std::errc() && p == end && std::isfinite(v);
}

bool parse_index(const std::string& s, std::size_t& v) {
  if (s.empty() || s.size() > 12) return false;
  const char* end = s.data() + s.size();
  unsigned long long u = 0;
  auto [p, ec] = std::from_chars(s.data(), end, u);
  if (ec != std::errc() || p != end) return false;
  v = static_cast<std::size_t>(u);
  return true;
}

std::string closest(const std::string& name, const std::vector<std::string>& candidates) {
  std::string best;
  std::size_t best_d = 3;  // suggest only near misses
  for (auto& c : candidates) {
    auto d = core::edit_distance(name, c);
    if (d < best_d) best_d = d, best = c;
  }
  return best.empty() ? "" : " (did you mean " + best + "?)";
}

std::string allowed_columns(const std::vector<std::string>& params) {
  std::string s = "file, realisation, role";
  for (auto& p : params) s += ", " + p;
  return s;
}

std::string roles_text() {
  std::string s;
  for (auto& r : kRoles) s += (s.empty() ? "" : ", ") + r;
  return s;
}

std::filesystem::path resolve(const std::filesystem::path& base, const std::string& file) {
  std::filesystem::path p(file);
  return p.is_absolute() ? p : base / p;
}

void read_csv(std::istream& in, Manifest& m) {
  const std::string src = m.source.string();
  const auto base = m.source.parent_path();
  std::string line;
  std::size_t line_no = 0;
  std::vector<std::string> header;
  std::size_t header_line = 0;
  while (std::getline(in, line)) {
    ++line_no;
    const std::string t = trim(line);
    if (t.empty() || t[0] == '#') continue;
    bool unbalanced = false;
    header = split_csv(line, unbalanced);
    header_line = line_no;
    break;
  }
  if (header.empty()) {
    m.problems.push_back(src + ": no header row (expected columns " + allowed_columns(m.param_names) + ")");
    return;
  }
  std::map<std::string, std::size_t> col;
  bool header_ok = true;
  for (std::size_t i = 0; i < header.size(); ++i) {
    const std::string& h = header[i];
    const bool known = h == "file" || h == "realisation" || h == "role" ||
                       std::find(m.param_names.begin(), m.param_names.end(), h) != m.param_names.end();
    if (!known) {
      std::vector<std::string> all{"file", "realisation", "role"};
      all.insert(all.end(), m.param_names.begin(), m.param_names.end());
      m.problems.push_back(src + ":" + std::to_string(header_line) + ": column '" + h + "' is not known" +
                           closest(h, all) + "; allowed: " + allowed_columns(m.param_names));
      header_ok = false;
    } else if (!col.emplace(h, i).second) {
      m.problems.push_back(src + ":" + std::to_string(header_line) + ": column '" + h + "' appears twice");
      header_ok = false;
    }
  }
  std::vector<std::string> needed{"file", "realisation"};
  needed.insert(needed.end(), m.param_names.begin(), m.param_names.end());
  for (auto& n : needed)
    if (!col.count(n)) {
      m.problems.push_back(src + ":" + std::to_string(header_line) + ": missing column '" + n +
                           "' (a manifest has file, realisation, optional role and every campaign parameter)");
      header_ok = false;
    }
  if (!header_ok) return;

  while (std::getline(in, line)) {
    ++line_no;
    const std::string t = trim(line);
    if (t.empty() || t[0] == '#') continue;
    const std::string where = src + ":" + std::to_string(line_no);
    bool unbalanced = false;
    const auto cells = split_csv(line, unbalanced);
    if (unbalanced) {
      m.problems.push_back(where + ": unbalanced double quote");
      continue;
    }
    if (cells.size() != header.size()) {
      m.problems.push_back(where + ": " + std::to_string(cells.size()) + " fields but the header has " +
                           std::to_string(header.size()) + " (" + allowed_columns(m.param_names) + ")");
      continue;
    }
    ManifestRow r;
    r.where = where;
    bool ok = true;
    const std::string file = cells[col["file"]];
    if (file.empty()) {
      m.problems.push_back(where + ": file is empty");
      ok = false;
    }
    r.file = resolve(base, file);
    if (!parse_index(cells[col["realisation"]], r.realisation)) {
      m.problems.push_back(where + ": realisation = '" + cells[col["realisation"]] +
                           "' is not a non-negative integer");
      ok = false;
    }
    if (col.count("role") && !cells[col["role"]].empty()) {
      r.role = cells[col["role"]];
      if (std::find(kRoles.begin(), kRoles.end(), r.role) == kRoles.end()) {
        m.problems.push_back(where + ": role = '" + r.role + "' is not one of " + roles_text());
        ok = false;
      }
    }
    for (auto& p : m.param_names) {
      const std::string& cell = cells[col[p]];
      double v = 0;
      if (cell.empty()) {
        m.problems.push_back(where + ": parameter " + p + " is missing (every row needs every campaign parameter)");
        ok = false;
      } else if (!parse_real(cell, v)) {
        m.problems.push_back(where + ": parameter " + p + " = '" + cell + "' is not a finite number");
        ok = false;
      }
      r.values.push_back(v);
    }
    if (ok) m.rows.push_back(std::move(r));
  }
}

void read_toml(const std::string& text, Manifest& m) {
  const std::string src = m.source.string();
  const auto base = m.source.parent_path();
  toml::table doc;
  try {
    doc = toml::parse(text, src);
  } catch (const toml::parse_error& e) {
    m.problems.push_back(src + ":" + std::to_string(e.source().begin.line) + ": not valid TOML: " +
                         printable(e.description(), 200));
    return;
  }
  for (auto&& [key, node] : doc)
    if (key.str() != "cone")
      m.problems.push_back(src + ":" + std::to_string(node.source().begin.line) + ": unknown key '" +
                           std::string(key.str()) + "' (a TOML manifest holds [[cone]] tables)");
  const toml::array* cones = doc["cone"].as_array();
  if (!cones || !cones->is_array_of_tables()) {
    m.problems.push_back(src + ": no [[cone]] tables");
    return;
  }
  for (auto& el : *cones) {
    const toml::table& t = *el.as_table();
    const std::string where = src + ":" + std::to_string(t.source().begin.line);
    ManifestRow r;
    r.where = where;
    bool ok = true;
    std::vector<std::string> all{"file", "realisation", "role"};
    all.insert(all.end(), m.param_names.begin(), m.param_names.end());
    for (auto&& [key, node] : t) {
      const std::string k(key.str());
      if (std::find(all.begin(), all.end(), k) == all.end()) {
        m.problems.push_back(where + ": key '" + k + "' is not known" + closest(k, all) + "; allowed: " +
                             allowed_columns(m.param_names));
        ok = false;
      }
    }
    if (auto f = t["file"].value<std::string>(); f && !f->empty()) {
      r.file = resolve(base, *f);
    } else {
      m.problems.push_back(where + ": file is missing or not a string");
      ok = false;
    }
    if (auto i = t["realisation"].value<std::int64_t>(); i && *i >= 0) {
      r.realisation = static_cast<std::size_t>(*i);
    } else {
      m.problems.push_back(where + ": realisation is missing or not a non-negative integer");
      ok = false;
    }
    if (t.contains("role")) {
      auto role = t["role"].value<std::string>();
      if (!role || std::find(kRoles.begin(), kRoles.end(), *role) == kRoles.end()) {
        m.problems.push_back(where + ": role is not one of " + roles_text());
        ok = false;
      } else {
        r.role = *role;
      }
    }
    for (auto& p : m.param_names) {
      auto v = t[p].value<double>();  // integers convert too
      if (!t.contains(p)) {
        m.problems.push_back(where + ": parameter " + p + " is missing (every row needs every campaign parameter)");
        ok = false;
      } else if (!v || !std::isfinite(*v)) {
        m.problems.push_back(where + ": parameter " + p + " is not a finite number");
        ok = false;
      }
      r.values.push_back(v.value_or(0.0));
    }
    if (ok) m.rows.push_back(std::move(r));
  }
}

}  // namespace

Manifest read_manifest(const std::filesystem::path& file, const std::vector<std::string>& param_names,
                       const Layout& layout) {
  Manifest m;
  m.source = file;
  m.param_names = param_names;
  m.layout = layout;
  std::ifstream in(file, std::ios::binary);
  if (!in) throw IoError(file.string() + ": cannot open the manifest (does it exist and is it readable?)");
  if (file.extension() == ".toml") {
    std::ostringstream text;
    text << in.rdbuf();
    read_toml(text.str(), m);
  } else {
    read_csv(in, m);
  }
  if (m.rows.empty() && m.problems.empty()) m.problems.push_back(file.string() + ": the manifest has no cones");
  return m;
}

Manifest manifest_from(const core::Config& cfg) {
  const Layout layout = layout_from(cfg);
  const std::filesystem::path given(cfg.string("ingest.manifest"));
  const auto path = given.is_absolute() ? given : cfg.directory() / given;
  const std::string ext = path.extension().string();
  if (ext != ".csv" && ext != ".toml")
    cfg.fail("ingest.manifest", "must be a .csv or .toml file");
  if (!std::filesystem::is_regular_file(path))
    cfg.fail("ingest.manifest", "no such file " + path.string());
  return read_manifest(path, cfg.table_names("parameters"), layout);
}

std::vector<ManifestPoint> points_of(const Manifest& m) {
  std::vector<ManifestPoint> points;
  std::map<std::vector<double>, std::size_t> index;
  std::vector<std::string> problems;
  for (std::size_t r = 0; r < m.rows.size(); ++r) {
    const ManifestRow& row = m.rows[r];
    auto [it, fresh] = index.emplace(row.values, points.size());
    if (fresh) points.push_back({row.values, row.role, {}});
    ManifestPoint& p = points[it->second];
    if (p.role != row.role)
      problems.push_back(row.where + ": role " + row.role + " differs from " + p.role +
                         " given earlier for the same parameters (one role per parameter vector)");
    p.realisations.emplace_back(row.realisation, r);
  }
  throw_if_problems(problems);
  for (auto& p : points) std::sort(p.realisations.begin(), p.realisations.end());
  return points;
}

void throw_if_problems(const std::vector<std::string>& problems) {
  if (problems.empty()) return;
  std::string text;
  for (auto& p : problems) text += (text.empty() ? "" : "\n") + p;
  throw InputError(text);
}

}  // namespace spinflip::ingest
