// What each catalogue dataset means: a `units` and a one-line `description`
// attribute on every dataset, and the axis datasets of a kernel attached to its
// `values` as HDF5 dimension scales (docs/catalogue.md, "Self-describing files").
// Used by the campaign catalogue and by `spinflip measure`, which share the
// kernel-group layout. Units are text: "1" for a dimensionless number, "" for text.
#pragma once
#include <hdf5.h>

#include <string>
#include <utility>
#include <vector>

#include "core/config.hpp"

namespace spinflip::catalogue {

struct DatasetMeta {
  std::string units, description;
};

/// A dataset of /design, /entries or /cones/history by its path below the root
/// ("design/points", "entries/status"), or a kernel axis by its leaf name
/// ("k_mean", "j1", "unit_z"). `wavenumber_units` is what k axes are in
/// ("Mpc^-1", or "rad/pixel" when `measure` has no cell size). Unknown names
/// get units "1" and a generic description.
DatasetMeta describe_dataset(const std::string& path, const std::string& wavenumber_units = "Mpc^-1");

/// The `values` of a kernel from its configuration attributes (`kernel`,
/// `power_unit`, `normalise`, …): units per quantity, in one line.
DatasetMeta describe_values(const std::vector<std::pair<std::string, core::Value>>& kernel_attributes);

/// Write `units` and `description` on an open dataset (collective in parallel
/// HDF5: every rank calls with the same text).
void annotate(hid_t dataset, const DatasetMeta& meta);

/// Make each named dataset of `group` a dimension scale and attach it to
/// `values`: dimension `values_rank - 2` (units) gets unit_freq_MHz / unit_z,
/// the last (coefficients) gets every coefficient axis. Labels the dimensions
/// "entry", "unit", "coefficient". Must run before the file is pre-allocated
/// and closed (the scales are metadata; DESIGN §7 allows none afterwards).
void attach_scales(hid_t group, hid_t values, int values_rank, const std::vector<std::string>& unit_axes,
                   const std::vector<std::string>& coeff_axes);

}  // namespace spinflip::catalogue
