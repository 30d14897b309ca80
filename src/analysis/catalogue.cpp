// Catalogue reader: /design, /entries and /stats of docs/catalogue.md.
#include <algorithm>
#include <cmath>
#include <limits>
#include <utility>

#include "analysis/analysis.hpp"
#include "analysis/h5.hpp"
#include "core/errors.hpp"

namespace spinflip::analysis {

struct Catalogue::Impl {
  std::string path;
  h5::Id file;
  Design design;
  std::vector<std::int64_t> point, realisation, status;
  std::vector<Block> blocks;
  std::vector<h5::Id> values;  // one open dataset per block
};

namespace {
const char* const kUnitAxes[] = {"unit_freq_MHz", "unit_z"};

void read_design(Catalogue::Impl& c) {
  const hid_t f = c.file.get();
  const std::string& p = c.path;
  Design& d = c.design;
  d.names = h5::read_strings(f, "design/param_names", p);
  const std::size_t n_params = d.names.size();
  h5::Id pts = h5::open_dataset(f, "design/points", p);
  const auto dims = h5::shape(pts.get());
  if (dims.size() != 2 || dims[1] != n_params)
    throw InputError(p + ": /design/points must be (n_points, " + std::to_string(n_params) +
                     ") to match /design/param_names");
  const std::size_t n_points = dims[0];
  const auto flat = h5::read_doubles(f, "design/points", p);
  d.points = Eigen::Map<const Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>>(
      flat.data(), static_cast<Eigen::Index>(n_points), static_cast<Eigen::Index>(n_params));
  d.role = h5::read_strings(f, "design/role", p);
  d.stencil_param = h5::read_ints(f, "design/stencil_param", p);
  d.stencil_step = h5::read_doubles(f, "design/stencil_step", p);
  d.stencil_step_index = h5::read_ints(f, "design/stencil_step_index", p);
  d.seed_point = h5::read_ints(f, "design/seed_point", p);
  auto check_len = [&](std::size_t n, const char* name) {
    if (n != n_points)
      throw InputError(p + ": /design/" + std::string(name) + " has " + std::to_string(n) + " rows, /design/points has " +
                       std::to_string(n_points));
  };
  check_len(d.role.size(), "role");
  check_len(d.stencil_param.size(), "stencil_param");
  check_len(d.stencil_step.size(), "stencil_step");
  check_len(d.stencil_step_index.size(), "stencil_step_index");
  check_len(d.seed_point.size(), "seed_point");
  // Optional per-parameter metadata: fall back to what the points show.
  d.units = h5::exists(f, "design/param_units") ? h5::read_strings(f, "design/param_units", p)
                                                : std::vector<std::string>(n_params, "");
  d.labels = h5::exists(f, "design/param_labels") ? h5::read_strings(f, "design/param_labels", p) : d.names;
  if (d.labels.size() != n_params) d.labels = d.names;
  d.log.assign(n_params, 0);
  if (h5::exists(f, "design/param_log")) {
    const auto v = h5::read_ints(f, "design/param_log", p);
    for (std::size_t i = 0; i < std::min(v.size(), n_params); ++i) d.log[i] = v[i] != 0;
  }
  auto vec = [&](const char* name, Eigen::VectorXd fallback) {
    const std::string path = std::string("design/") + name;
    if (!h5::exists(f, path)) return fallback;
    const auto v = h5::read_doubles(f, path, p);
    if (v.size() != n_params)
      throw InputError(p + ": /" + path + " has " + std::to_string(v.size()) + " values, expected " +
                       std::to_string(n_params));
    return Eigen::VectorXd(Eigen::Map<const Eigen::VectorXd>(v.data(), static_cast<Eigen::Index>(n_params)));
  };
  const bool any = n_points > 0;
  d.min = vec("param_min", any ? Eigen::VectorXd(d.points.colwise().minCoeff().transpose()) : Eigen::VectorXd());
  d.max = vec("param_max", any ? Eigen::VectorXd(d.points.colwise().maxCoeff().transpose()) : Eigen::VectorXd());
  d.fiducial = vec("param_fiducial", Eigen::VectorXd::Constant(static_cast<Eigen::Index>(n_params),
                                                               std::numeric_limits<double>::quiet_NaN()));
  if (d.units.size() != n_params) d.units.resize(n_params);
}

void read_entries(Catalogue::Impl& c) {
  const hid_t f = c.file.get();
  c.point = h5::read_ints(f, "entries/point", c.path);
  c.realisation = h5::read_ints(f, "entries/realisation", c.path);
  c.status = h5::read_ints(f, "entries/status", c.path);
  const std::size_t n = c.point.size();
  if (c.realisation.size() != n || c.status.size() != n)
    throw InputError(c.path + ": /entries/point, realisation and status differ in length");
  const auto n_points = static_cast<std::int64_t>(c.design.role.size());
  for (std::size_t e = 0; e < n; ++e)
    if (c.point[e] < 0 || c.point[e] >= n_points)
      throw InputError(c.path + ": /entries/point[" + std::to_string(e) + "] = " + std::to_string(c.point[e]) +
                       " is outside the design's 0.." + std::to_string(n_points - 1));
}

void read_stats(Catalogue::Impl& c) {
  const hid_t f = c.file.get();
  if (!h5::exists(f, "stats")) throw InputError(c.path + ": missing group '/stats' (see docs/catalogue.md)");
  h5::Id stats = h5::open_group(f, "stats", c.path);
  const std::size_t n_entries = c.point.size();
  for (const auto& scenario : h5::children(stats.get())) {
    h5::Id sg = h5::open_group(stats.get(), scenario, c.path);
    for (const auto& kernel : h5::children(sg.get())) {
      const std::string where = "/stats/" + scenario + "/" + kernel;
      h5::Id kg = h5::open_group(sg.get(), kernel, c.path);
      if (!h5::exists(kg.get(), "values")) continue;  // not a kernel group
      h5::Id values = h5::open_dataset(kg.get(), "values", c.path);
      const auto dims = h5::shape(values.get());
      if (dims.size() != 3 || dims[0] != n_entries)
        throw InputError(c.path + ": " + where + "/values must be (n_entries=" + std::to_string(n_entries) +
                         ", n_units, n_coeff)");
      Block b;
      b.scenario = scenario;
      b.kernel = kernel;
      b.n_units = dims[1];
      b.n_coeff = dims[2];
      for (const auto& name : h5::attr_names(kg.get())) b.attrs[name] = h5::attr_text(kg.get(), name);
      b.unit_kind = b.attrs.count("unit_kind") ? b.attrs["unit_kind"] : "";
      for (const auto& name : h5::children(kg.get())) {
        if (name == "values") continue;
        h5::Id ds = h5::open_dataset(kg.get(), name, c.path);
        const auto ad = h5::shape(ds.get());
        h5::Id type(H5Dget_type(ds.get()));
        const auto cls = H5Tget_class(type.get());
        if (ad.size() != 1 || (cls != H5T_INTEGER && cls != H5T_FLOAT)) continue;
        auto v = h5::read_doubles(kg.get(), name, c.path);
        if (name == kUnitAxes[0] || name == kUnitAxes[1]) {
          if (v.size() != b.n_units)
            throw InputError(c.path + ": " + where + "/" + name + " has " + std::to_string(v.size()) +
                             " values, expected n_units = " + std::to_string(b.n_units));
          (name == kUnitAxes[0] ? b.unit_freq_MHz : b.unit_z) = std::move(v);
        } else if (v.size() == b.n_coeff) {
          b.axes[name] = std::move(v);
        }
      }
      c.blocks.push_back(std::move(b));
      c.values.push_back(std::move(values));
    }
  }
  if (c.blocks.empty()) throw InputError(c.path + ": no /stats/<scenario>/<kernel>/values datasets");
}
}  // namespace

Catalogue::Catalogue(const std::string& path) : impl_(std::make_unique<Impl>()) {
  impl_->path = path;
  impl_->file = h5::open_read(path);
  read_design(*impl_);
  read_entries(*impl_);
  read_stats(*impl_);
}
Catalogue::~Catalogue() = default;
Catalogue::Catalogue(Catalogue&&) noexcept = default;

const std::string& Catalogue::path() const { return impl_->path; }
const Design& Catalogue::design() const { return impl_->design; }
const std::vector<std::int64_t>& Catalogue::entry_point() const { return impl_->point; }
const std::vector<std::int64_t>& Catalogue::entry_realisation() const { return impl_->realisation; }
const std::vector<std::int64_t>& Catalogue::entry_status() const { return impl_->status; }
const std::vector<Block>& Catalogue::blocks() const { return impl_->blocks; }
std::int64_t Catalogue::hdf5_file() const { return impl_->file.get(); }

Eigen::MatrixXd Catalogue::load(const Selection& selection, const std::vector<std::size_t>& entries) const {
  Eigen::MatrixXd out(static_cast<Eigen::Index>(entries.size()), static_cast<Eigen::Index>(selection.elements.size()));
  // Group the elements by block so each entry's row of a block is read once.
  std::vector<std::size_t> used;
  for (const auto& el : selection.elements)
    if (std::find(used.begin(), used.end(), el.block) == used.end()) used.push_back(el.block);
  std::vector<double> row;
  for (std::size_t b : used) {
    const Block& blk = impl_->blocks[b];
    const std::string what = impl_->path + ": reading /stats/" + blk.scenario + "/" + blk.kernel + "/values";
    for (std::size_t r = 0; r < entries.size(); ++r) {
      h5::read_row3(impl_->values[b].get(), entries[r], row, what);
      for (std::size_t k = 0; k < selection.elements.size(); ++k) {
        const auto& el = selection.elements[k];
        if (el.block != b) continue;
        double v = row[el.unit * blk.n_coeff + el.coeff];
        if (!el.average.empty()) {
          v = 0;
          for (std::size_t c : el.average) v += row[el.unit * blk.n_coeff + c];
          v /= static_cast<double>(el.average.size());
        }
        out(static_cast<Eigen::Index>(r), static_cast<Eigen::Index>(k)) = v;
      }
    }
  }
  return out;
}

}  // namespace spinflip::analysis
