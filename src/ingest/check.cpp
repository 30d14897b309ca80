// The file checker behind `plan`: every header opened, every problem listed.
#include <cmath>
#include <map>

#include "core/errors.hpp"
#include "cosmo/cosmology.hpp"
#include "ingest/internal.hpp"

namespace spinflip::ingest {

Target target_from(const sim::ConeSettings& s, const cosmo::Cosmology& c) {
  Target t;
  t.n_perp = s.n_perp;
  t.n_los = s.n_los;
  t.cell_mpc = s.cell_mpc;
  // The generator's grid (sim/lightcone.cpp): centres from the near end at z_min.
  const double d_near = c.comoving_distance_mpc(s.z_min);
  for (std::size_t k = 0; k < s.n_los; ++k) {
    const double d = d_near + (static_cast<double>(k) + 0.5) * s.cell_mpc;
    const double z = c.redshift_at_comoving_distance(d);
    t.distance_mpc.push_back(d);
    t.z.push_back(z);
    t.freq_MHz.push_back(cosmo::frequency_MHz(z));
  }
  return t;
}

namespace detail {

std::vector<std::string> check_file(const ManifestRow& row, const Layout& layout, const Target& target,
                                    const cosmo::Cosmology& c, bool scan) {
  std::vector<std::string> problems;
  const std::string where = row.where + ": " + row.file.string();
  FileHeader h;
  try {
    h = open_header(row.file, layout);
  } catch (const Error& e) {
    problems.push_back(row.where + ": " + e.what());
    return problems;
  }
  const std::size_t nx = h.shape[static_cast<std::size_t>(layout.file_axis[0])];
  const std::size_t ny = h.shape[static_cast<std::size_t>(layout.file_axis[1])];
  if (nx != target.n_perp || ny != target.n_perp)
    problems.push_back(where + ": wrong shape " + shape_text(h.shape) + ": with ingest.axis_order file axes " +
                       std::to_string(layout.file_axis[0]) + " and " + std::to_string(layout.file_axis[1]) +
                       " are transverse and must both be cone.n_perp = " + std::to_string(target.n_perp) +
                       " (transverse resampling is not done)");
  std::optional<double> cell;
  std::string cell_key;
  if (layout.transverse_cell_mpc) cell = layout.transverse_cell_mpc, cell_key = "ingest.transverse_cell_mpc";
  if (layout.field_of_view_mpc && nx > 0)
    cell = *layout.field_of_view_mpc / static_cast<double>(nx), cell_key = "ingest.field_of_view_mpc / n_perp";
  if (cell && std::abs(*cell / target.cell_mpc - 1.0) > 1e-3)
    problems.push_back(where + ": transverse cell " + format_number(*cell) + " Mpc (" + cell_key +
                       ") differs from cone.cell_mpc = " + format_number(target.cell_mpc) +
                       " Mpc (allowed: within 0.1%; transverse resampling is not done)");
  try {
    const auto d = to_distance(los_coordinates(row.file, h, layout), layout.los, c);
    los_map(d, target.distance_mpc, target.cell_mpc, c, row.file.string());
  } catch (const Error& e) {
    problems.push_back(row.where + ": " + e.what());
  }
  if (scan && problems.empty()) {
    try {
      const std::string bad = scan_nonfinite(row.file, h, layout);
      if (!bad.empty()) problems.push_back(where + ": NaN or Inf at file index " + bad + " (found by the scan)");
    } catch (const Error& e) {
      problems.push_back(row.where + ": " + e.what());
    }
  }
  return problems;
}

}  // namespace detail

namespace {
std::string values_text(const Manifest& m, const std::vector<double>& v) {
  std::string s;
  for (std::size_t i = 0; i < v.size(); ++i)
    s += (i ? ", " : "") + m.param_names[i] + " = " + detail::format_number(v[i]);
  return s;
}
}  // namespace

std::vector<std::string> check_all(const Manifest& m, const Target& target, const cosmo::Cosmology& c, bool scan) {
  std::vector<std::string> problems = m.problems;
  std::map<std::pair<std::vector<double>, std::size_t>, const ManifestRow*> seen_entry;
  std::map<std::filesystem::path, const ManifestRow*> seen_file;
  for (const auto& row : m.rows) {
    const auto key = std::make_pair(row.values, row.realisation);
    if (auto [it, fresh] = seen_entry.emplace(key, &row); !fresh)
      problems.push_back(row.where + ": duplicate: parameters (" + values_text(m, row.values) + ") with realisation " +
                         std::to_string(row.realisation) + " are already given at " + it->second->where);
    std::error_code ec;  // a path that cannot be resolved is compared as written
    auto canonical = std::filesystem::weakly_canonical(row.file, ec);
    if (ec) canonical = row.file.lexically_normal();
    if (auto [it, fresh] = seen_file.emplace(canonical, &row); !fresh) {
      const ManifestRow& first = *it->second;
      if (first.values != row.values)
        problems.push_back(row.where + ": " + row.file.string() + " is already given at " + first.where +
                           " with different parameters (" + values_text(m, first.values) + " there, " +
                           values_text(m, row.values) + " here)");
      else if (first.realisation != row.realisation)
        problems.push_back(row.where + ": " + row.file.string() + " is already given at " + first.where +
                           " as realisation " + std::to_string(first.realisation) +
                           ": one cone cannot be two independent realisations");
      continue;  // the file itself is checked once
    }
    auto file_problems = detail::check_file(row, m.layout, target, c, scan || m.layout.scan_nan);
    problems.insert(problems.end(), file_problems.begin(), file_problems.end());
  }
  return problems;
}

std::vector<std::string> check_campaign(const core::Config& config, bool scan) {
  const Manifest m = manifest_from(config);
  const cosmo::Cosmology c(cosmo::parameters_from(config));
  return check_all(m, target_from(sim::settings_from(config), c), c, scan);
}

std::optional<std::size_t> row_of(const Manifest& m, const std::vector<double>& values, std::size_t realisation) {
  for (std::size_t r = 0; r < m.rows.size(); ++r)
    if (m.rows[r].realisation == realisation && m.rows[r].values == values) return r;
  return std::nullopt;
}

}  // namespace spinflip::ingest
