// Line-of-sight resampling: linear interpolation in comoving distance between
// the two file slices whose centres bracket each target cell centre.
#include <algorithm>
#include <cmath>

#include "core/errors.hpp"
#include "cosmo/cosmology.hpp"
#include "ingest/internal.hpp"

namespace spinflip::ingest::detail {

LosMap los_map(const std::vector<double>& d, const std::vector<double>& t, double cell_mpc,
               const cosmo::Cosmology& c, const std::string& where) {
  const std::size_t L = d.size();
  if (L < 2) throw InputError(where + ": " + std::to_string(L) + " line-of-sight slice(s): at least 2 are needed");
  for (std::size_t j = 0; j < L; ++j)
    if (!std::isfinite(d[j]))
      throw InputError(where + ": line-of-sight coordinate of slice " + std::to_string(j) +
                       " is not a valid position (non-finite, or a frequency/redshift outside the 21-cm range)");
  const bool ascending = d[1] > d[0];
  for (std::size_t j = 1; j < L; ++j)
    if (ascending ? !(d[j] > d[j - 1]) : !(d[j] < d[j - 1]))
      throw InputError(where + ": line-of-sight coordinate is not strictly monotonic at slice " + std::to_string(j));
  const double lo = ascending ? d.front() : d.back(), hi = ascending ? d.back() : d.front();
  // Allowance for float rounding of coordinates written by another program.
  const double tol = 1e-4 * cell_mpc;
  if (t.front() < lo - tol || t.back() > hi + tol) {
    auto z = [&](double x) { return format_number(c.redshift_at_comoving_distance(std::max(x, 1e-6))); };
    throw InputError(where + ": band not covered: slices span z " + z(lo) + "..." + z(hi) + " (" +
                     format_number(lo) + "..." + format_number(hi) + " Mpc) but the campaign grid needs z " +
                     z(t.front()) + "..." + z(t.back()) + " (" + format_number(t.front()) + "..." +
                     format_number(t.back()) + " Mpc); a short cone is refused, not padded");
  }
  std::vector<double> r(d);  // ascending copy for the search
  if (!ascending) std::reverse(r.begin(), r.end());
  LosMap m;
  m.j0.resize(t.size());
  m.w.resize(t.size());
  std::size_t j_lo = L, j_hi = 0;
  for (std::size_t k = 0; k < t.size(); ++k) {
    const auto it = std::upper_bound(r.begin(), r.end(), t[k]);
    std::size_t a = it == r.begin() ? 0 : static_cast<std::size_t>(it - r.begin()) - 1;
    a = std::min(a, L - 2);
    const std::size_t j0 = ascending ? a : L - 2 - a;
    // Weight of slice j0 + 1; the same formula holds for either direction.
    const double w = (t[k] - d[j0]) / (d[j0 + 1] - d[j0]);
    m.j0[k] = j0;
    m.w[k] = std::clamp(w, 0.0, 1.0);
    if (m.w[k] == 1.0) m.j0[k] = j0 + 1, m.w[k] = 0.0;  // exactly on slice j0 + 1
    // Slice j0 + 1 is read only when its weight is non-zero: keep the read minimal.
    j_lo = std::min(j_lo, m.j0[k]);
    j_hi = std::max(j_hi, m.j0[k] + (m.w[k] > 0.0 ? 1 : 0));
  }
  m.j_lo = j_lo;
  m.n_slices = j_hi - j_lo + 1;
  for (auto& j : m.j0) j -= j_lo;
  return m;
}

}  // namespace spinflip::ingest::detail
