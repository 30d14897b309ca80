// Units and descriptions of catalogue datasets; dimension scales (H5DS, hdf5_hl).
#include "catalogue/describe.hpp"

#include <hdf5_hl.h>

#include <map>

#include "catalogue/hdf5.hpp"

namespace spinflip::catalogue {
namespace {
using h5::Handle;

const std::string kParamUnits = "see /design/param_units (one per parameter column)";

const std::map<std::string, DatasetMeta>& fixed_table() {
  static const std::map<std::string, DatasetMeta> t = {
      {"design/param_names", {"", "campaign parameter names, in the order of every parameter column"}},
      {"design/param_units", {"", "unit of each parameter ('' when dimensionless)"}},
      {"design/param_labels", {"", "axis label of each parameter for plots (the campaign's `label`)"}},
      {"design/param_log", {"1", "1 where the design samples log10 of the parameter, else 0"}},
      {"design/param_min", {kParamUnits, "lower end of each parameter's range"}},
      {"design/param_max", {kParamUnits, "upper end of each parameter's range"}},
      {"design/param_fiducial", {kParamUnits, "fiducial value of each parameter"}},
      {"design/points", {kParamUnits, "parameter vector of each design point (n_points x n_params)"}},
      {"design/role", {"", "role of each point: training, fiducial, stencil+, stencil- or list"}},
      {"design/design_index", {"1", "which [[designs]] block made the point (index into the `designs` attribute)"}},
      {"design/stencil_param", {"1", "parameter column a stencil point steps in (-1: not a stencil point)"}},
      {"design/stencil_step", {kParamUnits, "signed stencil step from the fiducial (log10 for log parameters; 0: none)"}},
      {"design/stencil_step_index", {"1", "which of the stencil's step sizes (-1: not a stencil point)"}},
      {"design/seed_point", {"1", "point whose realisation seeds this point shares (stencils share the fiducial's)"}},
      {"entries/point", {"1", "design point of each entry (row of /design/points)"}},
      {"entries/realisation", {"1", "realisation index of each entry"}},
      {"entries/params", {kParamUnits, "parameter vector of each entry (n_entries x n_params)"}},
      {"entries/seed", {"1", "(campaign seed, seed point, realisation) keying the entry's random numbers"}},
      {"entries/status", {"1", "0 pending, 1 done, 2 failed; written after the entry's data"}},
      {"entries/error", {"", "message of a failed entry (empty otherwise)"}},
      {"entries/wall_time_s", {"s", "wall-clock time the entry took (NaN until it runs)"}},
      {"entries/rank", {"1", "MPI rank that wrote the entry (-1 until it runs)"}},
      {"entries/source_file", {"", "ingested light-cone file of the entry (empty for generated cones)"}},
      {"entries/source_sha256", {"", "sha256 of the ingested file, hexadecimal (empty for generated cones)"}},
      {"cones/history/z", {"1", "redshifts at which the global histories are tabulated"}},
      {"cones/history/x_hi", {"1", "volume-averaged neutral hydrogen fraction of each entry's cone (n_entries x n_z)"}},
      {"cones/history/mean_tb_mK",
       {"mK", "mean 21-cm brightness temperature of each entry's cone (n_entries x n_z)"}},
      // Kernel-group datasets, by leaf name.
      {"unit_freq_MHz", {"MHz", "observed frequency at the centre of each unit (slice or chunk)"}},
      {"unit_z", {"1", "redshift at the centre of each unit (slice or chunk)"}},
      {"unit_index", {"1", "index of each unit (slice) along axis 2 of the input array"}},
      {"quantity",
       {"1", "which quantity a coefficient holds; names in the group's quantity_names attribute, units in values' "
             "units (power: 0 = P, 1 = Delta^2, the same k bins repeated for each)"}},
      {"n_modes", {"1", "kept Fourier modes in the bin (0: empty bin, its values NaN)"}},
      {"order", {"1", "scattering order: 0 (mean), 1 (S1) or 2 (S2)"}},
      {"j1", {"1", "first wavelet scale index j (filter size ~ 2^j pixels); -1 where unused"}},
      {"j2", {"1", "second wavelet scale index j (S2 only); -1 where unused"}},
      {"l1", {"1", "first orientation index l (angle pi*l/L); -1 where unused or rotation-averaged"}},
      {"l2", {"1", "second orientation index l; holds delta = (l2 - l1) mod L when rotation-averaged; -1 where unused"}},
      {"m1", {"1", "first line-of-sight wavelet scale index; -1 where unused"}},
      {"m2", {"1", "second line-of-sight wavelet scale index; -1 where unused"}},
      {"angle_deg", {"deg", "angle between the triangle sides k1 and k2"}},
      {"n_triangles", {"1", "number of closed triangles the shell estimator sums over"}},
      {"bin_lo", {"mK", "lower edge of the histogram bin (NaN for the four moments)"}},
      {"bin_hi", {"mK", "upper edge of the histogram bin (NaN for the four moments)"}},
  };
  return t;
}

const std::map<std::string, std::string>& wavenumber_table() {
  static const std::map<std::string, std::string> t = {
      {"k_lo", "lower edge of the |k| bin"},
      {"k_hi", "upper edge of the |k| bin"},
      {"k_mean", "mean |k| of the bin's kept modes (NaN: none kept)"},
      {"kperp_lo", "lower edge of the k_perp bin"},
      {"kperp_hi", "upper edge of the k_perp bin"},
      {"kpar_lo", "lower edge of the k_par bin"},
      {"kpar_hi", "upper edge of the k_par bin"},
      {"k1", "first triangle side |k1|"},
      {"k2", "second triangle side |k2|"},
      {"k3", "third triangle side |k3| = |k1 + k2|"},
  };
  return t;
}

std::string text_attr(const std::vector<std::pair<std::string, core::Value>>& attrs, const std::string& name,
                      const std::string& fallback = "") {
  for (const auto& [n, v] : attrs)
    if (n == name) {
      if (const auto* s = std::get_if<std::string>(&v)) return *s;
      if (const auto* i = std::get_if<std::int64_t>(&v)) return std::to_string(*i);
      if (const auto* b = std::get_if<bool>(&v)) return *b ? "1" : "0";
    }
  return fallback;
}

}  // namespace

DatasetMeta describe_dataset(const std::string& path, const std::string& wavenumber_units) {
  const auto& t = fixed_table();
  if (auto it = t.find(path); it != t.end()) return it->second;
  const std::string leaf = path.substr(path.rfind('/') + 1);  // kernel-group datasets go by leaf name
  if (auto it = t.find(leaf); it != t.end()) return it->second;
  const auto& k = wavenumber_table();
  if (auto it = k.find(leaf); it != k.end()) return {wavenumber_units, it->second};
  return {"1", "coefficient axis '" + leaf + "': one value per coefficient"};
}

DatasetMeta describe_values(const std::vector<std::pair<std::string, core::Value>>& attrs) {
  const std::string kernel = text_attr(attrs, "kernel");
  const std::string shape = " (n_entries x n_units x n_coeff; measure: n_units x n_coeff); NaN: not measured";
  if (kernel == "spherical power spectrum" || kernel == "2D power spectrum")
    return {text_attr(attrs, "power_unit", "mK^2 Mpc^3") + " (quantity 0, P); " +
                text_attr(attrs, "delta2_unit", "mK^2") + " (quantity 1, Delta^2)",
            kernel + ": P(k) of every bin, then Delta^2(k) of the same bins" + shape};
  if (kernel == "cylindrical power spectrum")
    return {text_attr(attrs, "power_unit", "mK^2 Mpc^3"), "cylindrical power P(k_perp, k_par), k_perp-major" + shape};
  if (kernel == "wavelet scattering")
    return {text_attr(attrs, "normalise") == "1" ? "mK (orders 0 and 1); 1 (order 2, normalised by S1)" : "mK",
            "wavelet scattering coefficients S0, S1, S2 of each unit" + shape};
  if (kernel == "FFT shell-estimator bispectrum")
    return {text_attr(attrs, "bispectrum_unit", "mK^3 Mpc^6") + " (quantity 0, B); " +
                text_attr(attrs, "normalised_unit", "1/mK") + " (quantity 1, normalised B)",
            "bispectrum of each triangle configuration" + shape};
  if (kernel == "one-point moments")
    return {"mK (mean); mK^2 (variance); 1 (skewness, excess kurtosis, histogram fractions)",
            "one-point moments of each unit, then the histogram fractions" + shape};
  return {"see the group's attributes", "coefficients of kernel '" + kernel + "'" + shape};
}

void annotate(hid_t dataset, const DatasetMeta& meta) {
  h5::write_attribute(dataset, "units", meta.units);
  h5::write_attribute(dataset, "description", meta.description);
}

void attach_scales(hid_t group, hid_t values, int values_rank, const std::vector<std::string>& unit_axes,
                   const std::vector<std::string>& coeff_axes) {
  auto attach = [&](const std::string& name, unsigned dim) {
    Handle ds = h5::dataset(SPINFLIP_H5_ID(H5Dopen2(group, name.c_str(), H5P_DEFAULT)));
    SPINFLIP_H5(H5DSset_scale(ds, name.c_str()));
    SPINFLIP_H5(H5DSattach_scale(values, ds, dim));
  };
  const auto unit_dim = static_cast<unsigned>(values_rank - 2), coeff_dim = static_cast<unsigned>(values_rank - 1);
  for (const auto& a : unit_axes) attach(a, unit_dim);
  for (const auto& a : coeff_axes) attach(a, coeff_dim);
  if (values_rank == 3) SPINFLIP_H5(H5DSset_label(values, 0, "entry"));
  SPINFLIP_H5(H5DSset_label(values, unit_dim, "unit"));
  SPINFLIP_H5(H5DSset_label(values, coeff_dim, "coefficient"));
}

}  // namespace spinflip::catalogue
