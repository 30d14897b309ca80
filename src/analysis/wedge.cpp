// The `above_wedge=<scenario>` selection term (docs/analysis.md): a scenario's foreground-wedge line
// k∥ = m(z) k⊥ + k_buffer at each unit's redshift, and which cylindrical-scattering coefficients
// ([stats.scattering3d]) have their filters above it. m(z) is the instrument's own formula
// (instrument::wedge_slope) with the campaign's cosmology at its fiducial point; the cell size
// converts the filters' centres from radians per cell to Mpc⁻¹.
#include <toml++/toml.h>

#include <cmath>
#include <sstream>

#include "analysis/internal.hpp"
#include "core/errors.hpp"
#include "cosmo/cosmology.hpp"
#include "instrument/instrument.hpp"
#include "sim/lightcone.hpp"

namespace spinflip::analysis::detail {
namespace {

double number_attr(hid_t group, const std::string& name, const std::string& where) {
  const std::string text = h5::attr_text(group, name);
  char* end = nullptr;
  const double v = std::strtod(text.c_str(), &end);
  if (text.empty() || end != text.c_str() + text.size() || !std::isfinite(v))
    throw InputError(where + ": attribute '" + name + "' is missing or not a number ('" + text +
                     "'); above_wedge needs the scenario's wedge settings (docs/catalogue.md)");
  return v;
}

}  // namespace

WedgeLine::WedgeLine(const Catalogue& catalogue, const std::string& scenario) {
  const hid_t file = static_cast<hid_t>(catalogue.hdf5_file());
  const std::string where = catalogue.path() + ": /stats/" + scenario;
  h5::Id group = h5::open_group(file, "stats/" + scenario, catalogue.path());
  angle_deg = number_attr(group.get(), "wedge_angle_deg", where);
  buffer_per_mpc = number_attr(group.get(), "wedge_buffer_per_mpc", where);

  // Cosmology and cell size: the campaign's [cosmology] and [cone] tables, with the declared
  // defaults, and any of their keys the design varies set to the fiducial point's value.
  const std::string text = h5::attr_text(file, "campaign_text");
  toml::table subset;
  try {
    const toml::table all = toml::parse(text);
    for (const char* t : {"cosmology", "cone"})
      if (const auto* tbl = all.get_as<toml::table>(t)) subset.insert(t, *tbl);
  } catch (const toml::parse_error& e) {
    throw InputError(catalogue.path() + ": the stored campaign_text does not parse (" + std::string(e.description()) +
                     "); above_wedge needs its [cosmology] and [cone] tables");
  }
  std::ostringstream os;
  os << subset;
  core::Schema schema;
  cosmo::declare_keys(schema);
  sim::declare_keys(schema);
  auto config = core::Config::from_string(os.str(), catalogue.path() + " (campaign_text)", schema);
  const auto& d = catalogue.design();
  for (std::size_t i = 0; i < d.names.size(); ++i)
    if (const auto* key = schema.find_varying(d.names[i]);
        key && static_cast<std::size_t>(d.fiducial.size()) > i && std::isfinite(d.fiducial[static_cast<Eigen::Index>(i)]))
      config.set_real(key->path, d.fiducial[static_cast<Eigen::Index>(i)], core::Origin::default_value);
  cell_mpc = config.real("cone.cell_mpc");
  cosmology_ = std::make_shared<cosmo::Cosmology>(cosmo::parameters_from(config));
}

double WedgeLine::slope(double z) const {
  return instrument::wedge_slope(cosmology_->comoving_distance_mpc(z), cosmology_->hubble_km_s_mpc(z), z, angle_deg);
}

bool WedgeLine::above(double kperp_mpc, double kpar_mpc, double z) const {
  return kpar_mpc >= slope(z) * kperp_mpc + buffer_per_mpc;
}

}  // namespace spinflip::analysis::detail
