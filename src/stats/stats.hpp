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

/// The Fourier modes an instrument kept in one unit (DESIGN.md §5 "Observed modes";
/// docs/stats.md). Compact: one entry per transverse Fourier cell (axes 0, 1 of a
/// chunk, both axes of a slice; full n0 × n1 grid, fftfreq order), never one per mode.
/// A default-constructed description keeps every mode (a clean unit).
struct KeptModes {
  static constexpr std::uint16_t none = 0xFFFF;
  /// Smallest |m∥| kept along the line of sight (a chunk's axis 2, k∥ = 2π m∥ / (n2 Δ2)) in
  /// each transverse cell: 0 keeps every k∥, `none` keeps nothing there. A slice has no
  /// k∥: it keeps a cell whose entry is not `none`. Empty: every cell keeps every k∥.
  std::vector<std::uint16_t> kpar_cut;
  /// Mean squared taper weight of each transverse cell (empty: 1, no taper).
  std::vector<float> weight2;
  /// The analytic wedge line the cut came from, k∥ < slope k⊥ + buffer (0, 0: no wedge).
  double wedge_slope = 0.0, wedge_buffer_per_mpc = 0.0;
  bool all() const { return kpar_cut.empty() && weight2.empty(); }
  bool operator==(const KeptModes&) const = default;
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
  /// Fourier-space kernels (power, bispectrum) average over the modes in `kept` only and
  /// return NaN for a bin without one; with an all-kept description they equal measure().
  /// Real-space kernels see the observed field as it is: the default ignores `kept`.
  virtual std::vector<double> measure_kept(const float* data, const Geometry& g, const KeptModes& kept) const {
    (void)kept;
    return measure(data, g);
  }
  /// Noise-bias-free cross-power of two observations of one field (independent noise):
  /// power kernels average Re(F_a F_b*) over kept modes; other kernels measure `a` alone.
  virtual std::vector<double> measure_cross(const float* a, const float* b, const Geometry& g,
                                            const KeptModes& kept) const {
    (void)b;
    return measure_kept(a, g, kept);
  }
  /// axes() with mode counts (n_modes, n_triangles) over the kept modes only.
  virtual std::vector<Axis> axes_kept(const Geometry& g, const KeptModes& kept) const {
    (void)kept;
    return axes(g);
  }
};

/// One kernel per [stats.*] table present in `config`, in declaration order.
std::vector<std::unique_ptr<Kernel>> kernels_from(const core::Config& config);

/// Throws InputError naming `what` if any value is NaN or infinite.
void check_finite(const float* data, std::size_t n, const std::string& what);

}  // namespace spinflip::stats
