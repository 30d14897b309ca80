// read_cone: one manifest row onto the campaign grid, by slab of axis 0.
#include <cmath>
#include <limits>

#include "core/checksum.hpp"
#include "core/errors.hpp"
#include "cosmo/cosmology.hpp"
#include "fft/fft.hpp"
#include "ingest/internal.hpp"

namespace spinflip::ingest {

std::array<std::size_t, 2> slab_of(std::size_t n_perp, MPI_Comm group) {
  int size = 1;
  if (group != MPI_COMM_SELF) SPINFLIP_CHECK_MPI(MPI_Comm_size(group, &size));
  if (size == 1) return {0, n_perp};
  // The slab fields' own decomposition (FFTW-MPI, axis 0), so an ingested cone
  // lines up with the instrument's and kernels' slabs; it depends on n0 only.
  const fft::SlabField probe({n_perp, n_perp, 2}, group);
  return {probe.local_start0(), probe.local_n0()};
}

IngestedCone read_cone(const Manifest& m, std::size_t row_index, const Target& t, const cosmo::Cosmology& c,
                       MPI_Comm group) {
  if (row_index >= m.rows.size())
    throw InternalError("ingest::read_cone: row " + std::to_string(row_index) + " of " +
                        std::to_string(m.rows.size()));
  const ManifestRow& row = m.rows[row_index];
  const Layout& layout = m.layout;
  // Every rank checks the same header, so every rank throws the same error.
  throw_if_problems(detail::check_file(row, layout, t, c, false));
  const auto h = detail::open_header(row.file, layout);
  const auto map = detail::los_map(detail::to_distance(detail::los_coordinates(row.file, h, layout), layout.los, c),
                                   t.distance_mpc, t.cell_mpc, c, row.where + ": " + row.file.string());
  const auto [start, count] = slab_of(t.n_perp, group);
  const std::vector<float> block =
      detail::read_block(row.file, h, layout, start, count, map.j_lo, map.n_slices, group);

  IngestedCone out;
  out.file = row.file;
  sim::LightCone& cone = out.cone;
  const std::size_t np = t.n_perp, nl = t.n_los, ns = map.n_slices;
  cone.global_shape = {np, np, nl};
  cone.local_start0 = start;
  cone.local_n0 = count;
  cone.cell_mpc = t.cell_mpc;
  cone.distance_mpc = t.distance_mpc;
  cone.z = t.z;
  cone.freq_MHz = t.freq_MHz;
  cone.delta_tb_mK = core::Array3<float>(count, np, nl);
  long long first_bad = std::numeric_limits<long long>::max();
  std::vector<double> plane_sum(nl, 0.0);
  for (std::size_t i = 0; i < count; ++i)
    for (std::size_t j = 0; j < np; ++j) {
      const float* s = block.data() + (i * np + j) * ns;
      float* o = &cone.delta_tb_mK(i, j, 0);
      for (std::size_t k = 0; k < nl; ++k) {
        const std::size_t j0 = map.j0[k];
        const double w = map.w[k];
        const double v = w > 0.0 ? (1.0 - w) * s[j0] + w * s[j0 + 1] : s[j0];
        o[k] = static_cast<float>(v);
        plane_sum[k] += v;
        if (!std::isfinite(v) && first_bad == std::numeric_limits<long long>::max())
          first_bad = static_cast<long long>(((start + i) * np + j) * nl + k);
      }
    }
  SPINFLIP_CHECK_MPI(MPI_Allreduce(MPI_IN_PLACE, &first_bad, 1, MPI_LONG_LONG, MPI_MIN, group));
  if (first_bad != std::numeric_limits<long long>::max()) {
    const auto q = static_cast<std::size_t>(first_bad);
    throw InputError(row.where + ": " + row.file.string() + ": NaN or Inf in the cone at grid cell (" +
                     std::to_string(q / (np * nl)) + ", " + std::to_string((q / nl) % np) + ", " +
                     std::to_string(q % nl) + ") (x, y, los) after resampling");
  }
  SPINFLIP_CHECK_MPI(
      MPI_Allreduce(MPI_IN_PLACE, plane_sum.data(), static_cast<int>(nl), MPI_DOUBLE, MPI_SUM, group));
  cone.tb_mean_mK.resize(nl);
  for (std::size_t k = 0; k < nl; ++k) cone.tb_mean_mK[k] = plane_sum[k] / static_cast<double>(np * np);
  // An ingested cone carries no ionization history: NaN says "unknown".
  cone.x_hi_mean.assign(nl, std::numeric_limits<double>::quiet_NaN());

  // Checksum of the whole file (same as `sha256sum FILE`), whatever the group size.
  int rank = 0;
  SPINFLIP_CHECK_MPI(MPI_Comm_rank(group, &rank));
  char hex[65] = {0};
  if (rank == 0) {
    try {  // a failure must reach every rank, not leave them in the broadcast
      const std::string s = core::sha256_file(row.file);
      std::copy(s.begin(), s.begin() + std::min<std::size_t>(64, s.size()), hex);
    } catch (const Error&) {
      hex[0] = '\0';
    }
  }
  SPINFLIP_CHECK_MPI(MPI_Bcast(hex, 64, MPI_CHAR, 0, group));
  out.sha256 = hex;
  if (out.sha256.size() != 64) throw IoError(row.file.string() + ": cannot read the file to checksum it");
  return out;
}

}  // namespace spinflip::ingest
