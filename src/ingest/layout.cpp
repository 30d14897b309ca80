// The [ingest] keys: declared once here, read back into a Layout.
#include <algorithm>
#include <cstdio>
#include <string>

#include "core/errors.hpp"
#include "ingest/internal.hpp"

namespace spinflip::ingest {

using core::KeySpec;
using core::ValueType;

void declare_keys(core::Schema& s) {
  s.add_table("ingest", "Take the light cones from files (a manifest of cones and their shared layout) instead of "
                        "the built-in generator; see docs/ingest.md.");
  s.add({.path = "ingest.manifest", .type = ValueType::string,
         .doc = "manifest of cones (.csv or .toml): file, realisation, optional role and one column per "
                "campaign parameter; relative to the campaign file"});
  s.add({.path = "ingest.format", .type = ValueType::string, .default_value = std::string("auto"),
         .choices = {"auto", "hdf5", "npy", "raw"},
         .doc = "file format (auto: .h5/.hdf5 HDF5, .npy NumPy, anything else raw float32 with a FILE.toml sidecar)"});
  s.add({.path = "ingest.dataset", .type = ValueType::string, .default_value = std::string("delta_tb_mK"),
         .doc = "HDF5: path of the 3D brightness-temperature dataset inside each file"});
  s.add({.path = "ingest.axis_order", .type = ValueType::string_array,
         .default_value = std::vector<std::string>{"x", "y", "los"},
         .doc = "what each file axis is, slowest first: a permutation of x, y and los (line of sight)"});
  s.add({.path = "ingest.units", .type = ValueType::string, .default_value = std::string("mK"),
         .choices = {"mK", "K"}, .doc = "unit of the files' brightness temperature"});
  s.add({.path = "ingest.los_coordinate", .type = ValueType::string,
         .choices = {"frequency_MHz", "redshift", "distance_mpc"},
         .doc = "what the per-slice line-of-sight coordinate is (slice centres; distance_mpc is comoving "
                "distance from the observer)"});
  s.add({.path = "ingest.los_dataset", .type = ValueType::string, .default_value = std::string(""),
         .doc = "HDF5: dataset of the per-slice coordinate in each file (empty: los_start and los_step)"});
  s.add({.path = "ingest.los_start", .type = ValueType::real, .default_value = 0.0,
         .doc = "coordinate of the first slice centre (used, and needed, when there is no los_dataset)"});
  s.add({.path = "ingest.los_step", .type = ValueType::real, .default_value = 0.0,
         .doc = "coordinate step between slices, either sign (used, and needed, when there is no los_dataset)"});
  s.add({.path = "ingest.transverse_cell_mpc", .type = ValueType::real, .default_value = 0.0, .unit = "Mpc",
         .min = 0.0, .doc = "comoving transverse cell of the files; must equal cone.cell_mpc (not given: assumed equal)"});
  s.add({.path = "ingest.field_of_view_mpc", .type = ValueType::real, .default_value = 0.0, .unit = "Mpc",
         .min = 0.0,
         .doc = "instead of transverse_cell_mpc: comoving side of the files' transverse plane (n_perp × cell)"});
  s.add({.path = "ingest.scan_nan", .type = ValueType::boolean, .default_value = false,
         .doc = "the file check also reads every file's data looking for NaN or Inf (as plan --scan)"});
}

Layout layout_from(const core::Config& cfg) {
  Layout l;
  const std::string f = cfg.string("ingest.format");
  l.format = f == "hdf5" ? Format::hdf5 : f == "npy" ? Format::npy : f == "raw" ? Format::raw : Format::automatic;
  l.dataset = cfg.string("ingest.dataset");
  const auto order = cfg.strings("ingest.axis_order");
  const std::array<std::string, 3> names{"x", "y", "los"};
  bool ok = order.size() == 3;
  for (std::size_t a = 0; ok && a < 3; ++a) {
    auto it = std::find(order.begin(), order.end(), names[a]);
    if (it == order.end() || std::count(order.begin(), order.end(), names[a]) != 1) ok = false;
    else l.file_axis[a] = static_cast<int>(it - order.begin());
  }
  if (!ok) cfg.fail("ingest.axis_order", "must name each of \"x\", \"y\" and \"los\" once, slowest axis first");
  l.to_mK = cfg.string("ingest.units") == "K" ? 1000.0 : 1.0;
  const std::string c = cfg.string("ingest.los_coordinate");
  l.los = c == "redshift" ? LosCoordinate::redshift
          : c == "distance_mpc" ? LosCoordinate::distance_mpc : LosCoordinate::frequency_MHz;
  l.los_dataset = cfg.string("ingest.los_dataset");
  if (cfg.has("ingest.los_start")) l.los_start = cfg.real("ingest.los_start");
  if (cfg.has("ingest.los_step")) {
    l.los_step = cfg.real("ingest.los_step");
    if (!(*l.los_step != 0.0)) cfg.fail("ingest.los_step", "must not be 0 (slices need distinct coordinates)");
  }
  if (l.los_start.has_value() != l.los_step.has_value())
    cfg.fail(l.los_start ? "ingest.los_start" : "ingest.los_step",
             "ingest.los_start and ingest.los_step go together: give both or neither");
  if (cfg.has("ingest.transverse_cell_mpc")) {
    l.transverse_cell_mpc = cfg.real("ingest.transverse_cell_mpc");
    if (!(*l.transverse_cell_mpc > 0)) cfg.fail("ingest.transverse_cell_mpc", "must be positive");
  }
  if (cfg.has("ingest.field_of_view_mpc")) {
    l.field_of_view_mpc = cfg.real("ingest.field_of_view_mpc");
    if (!(*l.field_of_view_mpc > 0)) cfg.fail("ingest.field_of_view_mpc", "must be positive");
    if (l.transverse_cell_mpc)
      cfg.fail("ingest.field_of_view_mpc", "give ingest.transverse_cell_mpc or ingest.field_of_view_mpc, not both");
  }
  l.scan_nan = cfg.boolean("ingest.scan_nan");
  return l;
}

namespace detail {

std::string format_number(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.6g", v);
  return buf;
}

std::string shape_text(const std::array<std::size_t, 3>& s) {
  return "(" + std::to_string(s[0]) + ", " + std::to_string(s[1]) + ", " + std::to_string(s[2]) + ")";
}

}  // namespace detail
}  // namespace spinflip::ingest
