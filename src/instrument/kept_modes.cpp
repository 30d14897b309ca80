// Scenario::kept_modes: which Fourier modes of a slice or chunk survive the
// instrument (DESIGN.md §5 "Observed modes"; docs/instrument.md, "Kept modes").
// The uv coverage, taper and wedge are the same for every entry, so this runs once
// per campaign, scenario and unit, and the result is one small table per unit.
#include <algorithm>
#include <numbers>

#include "core/errors.hpp"
#include "instrument/instrument.hpp"
#include "instrument/internal.hpp"

namespace spinflip::instrument {

stats::KeptModes Scenario::kept_modes(const Unit& unit, bool chunk, const ConeGeometry& g) const {
  const std::size_t N = n_perp_, P = N * N, L = n_los_;
  if (unit.los_begin >= unit.los_end || unit.los_end > L) throw InternalError("kept_modes: unit outside the cone");
  const std::size_t C = settings_.wedge ? settings_.chunk_cells : 0;
  if (chunk && C > 0 && (unit.los_begin % C != 0 || unit.los_end - unit.los_begin != std::min(C, L - unit.los_begin)))
    throw InternalError("kept_modes: a chunk is not one of the wedge's chunks");
  stats::KeptModes kept;
  kept.kpar_cut.assign(P, 0);
  // The transverse mean of every LOS cell is removed, so k⊥ = 0 keeps nothing: in a chunk
  // the whole k∥ column, in a slice the k = 0 mode.
  kept.kpar_cut[0] = stats::KeptModes::none;
  // uv coverage: a cell is kept when every LOS cell of the unit has baselines there. One
  // seen in part of the unit only is biased low by the LOS cells without it, so it is
  // left out with the unobserved ones (the coverage scales with frequency: its edge moves).
  if (!uv_time_.empty())
    for (std::size_t k = unit.los_begin; k < unit.los_end; ++k)
      for (std::size_t q = 0; q < P; ++q)
        if (!(uv_time_[k * P + q] > 0)) kept.kpar_cut[q] = stats::KeptModes::none;
  if (C > 0) {
    // The wedge is cut on the instrument's chunks [a, a + C). A chunk unit is one of them
    // and keeps |m∥| ≥ the cut. A slice keeps a transverse cell unless the wedge removed
    // every k∥ there in a chunk the slice draws from (then the slice holds exactly zero);
    // a slice cell whose low k∥ were cut is kept and carries the k∥ above the wedge only.
    kept.wedge_slope = slopes_[(unit.los_begin + unit.los_end) / 2];
    kept.wedge_buffer_per_mpc = settings_.wedge_buffer_per_mpc;
    for (std::size_t a = unit.los_begin / C * C; a < unit.los_end; a += C) {
      const std::size_t len = std::min(C, L - a), top = len / 2;
      const double slope = slopes_[a + len / 2];  // as Scenario::apply
      const double dk_par = 2.0 * std::numbers::pi / (static_cast<double>(len) * g.cell_mpc);
      for (std::size_t i = 0; i < N; ++i)
        for (std::size_t j = 0; j < N; ++j) {
          auto& cut = kept.kpar_cut[i * N + j];
          if (cut == stats::KeptModes::none) continue;
          const std::size_t n =
              detail::wedge_cut(slope * detail::transverse_k(i, j, N, g.cell_mpc) + settings_.wedge_buffer_per_mpc,
                                dk_par, top);
          if (n > top) cut = stats::KeptModes::none;
          else if (chunk) cut = static_cast<std::uint16_t>(n);
        }
    }
  }
  if (!taper_.empty()) {
    // The taper multiplies each cell by w_k(i, j) at LOS cell k. A chunk's power over k∥
    // carries the mean of w²; a slice (the mean of its planes) carries the mean of w, squared.
    kept.weight2.assign(P, 0.0f);
    const double n = static_cast<double>(unit.los_end - unit.los_begin);
    for (std::size_t i = 0; i < N; ++i)
      for (std::size_t j = 0; j < N; ++j) {
        double s1 = 0, s2 = 0;
        for (std::size_t k = unit.los_begin; k < unit.los_end; ++k) {
          const double w = taper_weight(k, i, j);
          s1 += w;
          s2 += w * w;
        }
        kept.weight2[i * N + j] = static_cast<float>(chunk ? s2 / n : (s1 / n) * (s1 / n));
      }
  }
  return kept;
}

}  // namespace spinflip::instrument
