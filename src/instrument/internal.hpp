// Internal to src/instrument: the wedge cut, shared by Scenario::apply (which removes
// the modes) and Scenario::kept_modes (which tells the kernels which are left), so the
// two can never disagree on a mode.
#pragma once
#include <algorithm>
#include <cmath>
#include <cstddef>
#include <numbers>

#include "core/array.hpp"

namespace spinflip::instrument::detail {

/// k⊥ (1/Mpc) of transverse Fourier cell (i, j) of an N × N grid of cells of `cell_mpc`.
inline double transverse_k(std::size_t i, std::size_t j, std::size_t n, double cell_mpc) {
  const double dk_perp = 2.0 * std::numbers::pi / (static_cast<double>(n) * cell_mpc);
  return dk_perp * std::hypot(static_cast<double>(core::fft_index(i, n)), static_cast<double>(core::fft_index(j, n)));
}

/// Number of line-of-sight indices |m| = 0, 1, … cut by the wedge on a chunk whose k∥
/// spacing is dk_par and largest |m| is top: |m| is cut when dk_par |m| < line, line =
/// m(z) k⊥ + buffer (docs/instrument.md). top + 1 means every k∥ is cut.
inline std::size_t wedge_cut(double line, double dk_par, std::size_t top) {
  const auto cut = [&](std::size_t f) { return dk_par * static_cast<double>(f) < line; };
  std::size_t n = static_cast<std::size_t>(std::clamp(std::ceil(line / dk_par), 0.0, static_cast<double>(top + 1)));
  while (n > 0 && !cut(n - 1)) --n;
  while (n <= top && cut(n)) ++n;
  return n;
}

}  // namespace spinflip::instrument::detail
