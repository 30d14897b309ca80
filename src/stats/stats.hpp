// Statistic kernels (DESIGN.md §6): power spectra, wavelet scattering,
// bispectrum and one-point moments of a real field. Pure computation: no MPI,
// no HDF5, no campaign. Kernels are immutable after construction, so
// measure() may run on different slices from several threads at once (shape-
// dependent tables are built on first use behind a mutex and then shared).
#pragma once
#include <array>
#include <cstddef>
#include <cstdint>
#include <memory>
#include <string>
#include <utility>
#include <variant>
#include <vector>

#include "core/config.hpp"

namespace spinflip::stats {

/// Declares the [stats.*] tables: power, slice_power, cylindrical, scattering,
/// bispectrum, slice_bispectrum, moments, chunk_moments (docs/stats.md).
void declare_keys(core::Schema& schema);

/// A slice is a 2D field (axes 0, 1); a chunk a 3D field (axis 2 = line of sight).
enum class UnitKind { slice, chunk };

/// Shape and cell size of one unit, C order (last axis contiguous). `cell_mpc`
/// per axis; 0 means "no cell size": wavenumbers are then 2π m / N in radians
/// per cell and volumes count cells.
struct Geometry {
  std::vector<std::size_t> shape;  // 2 entries (slice) or 3 (chunk)
  std::array<double, 3> cell_mpc{0.0, 0.0, 0.0};
  std::size_t n_cells() const;
  double cell(std::size_t axis) const { return cell_mpc[axis] > 0.0 ? cell_mpc[axis] : 1.0; }
};

/// One array describing every coefficient (n_coeff long).
struct Axis {
  std::string name;
  std::variant<std::vector<double>, std::vector<std::int64_t>> values;
};

/// Configuration stored beside the values (HDF5 group attributes).
using Attributes = std::vector<std::pair<std::string, core::Value>>;

class Kernel {
 public:
  virtual ~Kernel() = default;
  /// The table leaf name ("power", "scattering", ...): the output group name.
  virtual const std::string& name() const = 0;
  virtual UnitKind unit_kind() const = 0;
  /// Throws InputError when the kernel cannot measure this geometry (wrong
  /// dimensionality, too few cells for the requested scales).
  virtual void check(const Geometry& g) const = 0;
  virtual std::size_t n_coeff(const Geometry& g) const = 0;
  virtual std::vector<Axis> axes(const Geometry& g) const = 0;
  /// `data` holds g.n_cells() finite values in C order; returns n_coeff values.
  virtual std::vector<double> measure(const float* data, const Geometry& g) const = 0;
  virtual Attributes attributes() const = 0;
};

/// One kernel per [stats.*] table present in `config`, in declaration order.
std::vector<std::unique_ptr<Kernel>> kernels_from(const core::Config& config);

/// Throws InputError naming `what` if any value is NaN or infinite.
void check_finite(const float* data, std::size_t n, const std::string& what);

}  // namespace spinflip::stats
