#include "sim/zeldovich.hpp"

#include <algorithm>
#include <climits>
#include <cmath>
#include <cstdint>
#include <string>

#include "core/errors.hpp"
#include "sim/initial_conditions.hpp"

namespace spinflip::sim::detail {
namespace {

/// Displacement component `axis` in Fourier space, ψ_a(k) = i k_a δ0(k)/k². The k = 0 mode and
/// the Nyquist plane of the axis are zero: the derivative of a Nyquist mode has no real
/// representation (common practice for spectral derivatives).
void displacement_component(const fft::SlabField& lin, fft::SlabField& out, double cell_mpc, std::size_t axis) {
  const auto& n = lin.global_shape();
  const std::size_t n0 = lin.local_n0(), start = lin.local_start0(), half = lin.half_n2();
  auto nyquist = [&](std::size_t i, std::size_t len) { return len % 2 == 0 && i == len / 2; };
  std::vector<double> k2(half);
  for (std::size_t kh = 0; kh < half; ++kh) k2[kh] = wavenumber(kh, n[2], cell_mpc);
  for (std::size_t kh = 0; kh < half; ++kh)  // axis 2 holds 0..n2/2: the last is Nyquist when n2 is even
    if (nyquist(kh, n[2])) k2[kh] = -k2[kh];  // wavenumber() gives −π/Δ there; the r2c half stores +π/Δ
  const fft::cfloat* a = lin.complex_data();
  fft::cfloat* b = out.complex_data();
  for (std::size_t i = 0; i < n0; ++i) {
    const double k0 = wavenumber(start + i, n[0], cell_mpc);
    const bool ny0 = nyquist(start + i, n[0]);
    for (std::size_t j = 0; j < n[1]; ++j) {
      const double k1 = wavenumber(j, n[1], cell_mpc);
      const bool ny1 = nyquist(j, n[1]);
      const std::size_t row = (i * n[1] + j) * half;
      for (std::size_t kh = 0; kh < half; ++kh) {
        const double kk = k0 * k0 + k1 * k1 + k2[kh] * k2[kh];
        double ka = axis == 0 ? (ny0 ? 0.0 : k0) : axis == 1 ? (ny1 ? 0.0 : k1) : (nyquist(kh, n[2]) ? 0.0 : k2[kh]);
        const auto g = static_cast<float>(kk > 0 ? ka / kk : 0.0);
        const fft::cfloat v = a[row + kh];
        b[row + kh] = fft::cfloat(-g * v.imag(), g * v.real());  // (i g) v
      }
    }
  }
}

long floor_mod(long a, long n) {
  const long r = a % n;
  return r < 0 ? r + n : r;
}

}  // namespace

ZeldovichDeposit zeldovich_density(const fft::SlabField& lin, double cell_mpc, const std::vector<double>& growth,
                                   const std::array<fft::SlabField*, 3>& psi, core::Array3<float>& rho,
                                   MPI_Comm group) {
  const auto& n = lin.global_shape();
  const std::size_t n0 = lin.local_n0(), start = lin.local_start0(), pad = lin.padded_n2();
  const std::size_t np = n[1], nl = n[2], plane = np * nl;
  if (growth.size() != nl || rho.shape != std::array<std::size_t, 3>{n0, np, nl})
    throw InternalError("zeldovich_density: growth or output does not match the slab");
  int size = 1, rank = 0;
  SPINFLIP_CHECK_MPI(MPI_Comm_size(group, &size));
  SPINFLIP_CHECK_MPI(MPI_Comm_rank(group, &rank));

  for (std::size_t a = 0; a < 3; ++a) {
    displacement_component(lin, *psi[a], cell_mpc, a);
    psi[a]->inverse();  // ψ_a(q) in Mpc
  }
  // Displacements in cells, D(z_k) ψ / Δ, in place.
  std::vector<float> scale(nl);
  for (std::size_t k = 0; k < nl; ++k) scale[k] = static_cast<float>(growth[k] / cell_mpc);
  double reach = 0;  // the largest |displacement| along axis 0, in cells
  for (std::size_t a = 0; a < 3; ++a)
    for (std::size_t r = 0; r < n0 * np; ++r) {
      float* s = psi[a]->real_data() + r * pad;
      for (std::size_t k = 0; k < nl; ++k) s[k] *= scale[k];
      if (a == 0)
        for (std::size_t k = 0; k < nl; ++k) reach = std::max(reach, static_cast<double>(std::abs(s[k])));
    }
  SPINFLIP_CHECK_MPI(MPI_Allreduce(MPI_IN_PLACE, &reach, 1, MPI_DOUBLE, MPI_MAX, group));
  if (!std::isfinite(reach)) throw ModelError("cone.zeldovich_displacement: the displacement field is not finite");

  // Ghost planes of axis 0 on each side (a CIC deposit reaches floor(x) + 1). One rank wraps
  // its own planes instead.
  const long N0 = static_cast<long>(n[0]);
  const std::size_t ghosts = size > 1 ? static_cast<std::size_t>(std::ceil(reach)) + 1 : 0;
  std::fill(rho.data.begin(), rho.data.end(), 0.0f);
  std::vector<float> low(ghosts * plane, 0.0f), high(ghosts * plane, 0.0f);
  const long s0 = static_cast<long>(start), ln0 = static_cast<long>(n0), G = static_cast<long>(ghosts);
  auto plane_of = [&](long g) -> float* {
    const long rel = g - s0;
    if (rel >= 0 && rel < ln0) return rho.data.data() + static_cast<std::size_t>(rel) * plane;
    if (size == 1) return rho.data.data() + static_cast<std::size_t>(floor_mod(g, N0)) * plane;
    if (rel < 0 && rel >= -G) return low.data() + static_cast<std::size_t>(rel + G) * plane;
    if (rel >= ln0 && rel < ln0 + G) return high.data() + static_cast<std::size_t>(rel - ln0) * plane;
    throw InternalError("zeldovich_density: a deposit beyond the ghost planes");
  };

  double dropped = 0;
  const long lnp = static_cast<long>(np), lnl = static_cast<long>(nl);
  for (std::size_t i = 0; i < n0; ++i)
    for (std::size_t j = 0; j < np; ++j) {
      const std::size_t r = (i * np + j) * pad;
      const float* sx = psi[0]->real_data() + r;
      const float* sy = psi[1]->real_data() + r;
      const float* sz = psi[2]->real_data() + r;
      for (std::size_t k = 0; k < nl; ++k) {
        const double px = static_cast<double>(start + i) + sx[k];
        const double py = static_cast<double>(j) + sy[k];
        const double pz = static_cast<double>(k) + sz[k];
        const double fx = std::floor(px), fy = std::floor(py), fz = std::floor(pz);
        const auto wx1 = static_cast<float>(px - fx), wy1 = static_cast<float>(py - fy),
                   wz1 = static_cast<float>(pz - fz);
        const float wx[2] = {1.0f - wx1, wx1}, wy[2] = {1.0f - wy1, wy1}, wz[2] = {1.0f - wz1, wz1};
        const auto ix = static_cast<long>(fx), iy = static_cast<long>(fy), iz = static_cast<long>(fz);
        float* const pl[2] = {plane_of(ix), plane_of(ix + 1)};
        const long y0 = floor_mod(iy, lnp), y1 = y0 + 1 == lnp ? 0 : y0 + 1;
        const std::size_t row[2] = {static_cast<std::size_t>(y0 * lnl), static_cast<std::size_t>(y1 * lnl)};
        for (int c = 0; c < 2; ++c) {
          const long z = iz + c;
          if (z < 0 || z >= lnl) {  // past the LOS end: lost (periodic only transversally)
            dropped += static_cast<double>(wz[c]);
            continue;
          }
          const auto zu = static_cast<std::size_t>(z);
          for (int a = 0; a < 2; ++a) {
            const float w = wx[a] * wz[c];
            pl[a][row[0] + zu] += w * wy[0];
            pl[a][row[1] + zu] += w * wy[1];
          }
        }
      }
    }

  // Ghost planes go to the ranks that own them (periodic axis 0); added in rank order.
  ZeldovichDeposit result;
  result.ghost_planes = ghosts;
  if (size > 1) {
    std::vector<int> slabs(2 * static_cast<std::size_t>(size));
    const int mine[2] = {static_cast<int>(start), static_cast<int>(n0)};
    SPINFLIP_CHECK_MPI(MPI_Allgather(mine, 2, MPI_INT, slabs.data(), 2, MPI_INT, group));
    auto owner = [&](long g) {
      for (int q = 0; q < size; ++q) {
        const long b = slabs[2 * static_cast<std::size_t>(q)], m = slabs[2 * static_cast<std::size_t>(q) + 1];
        if (g >= b && g < b + m) return q;
      }
      throw InternalError("zeldovich_density: no rank owns plane " + std::to_string(g));
    };
    // Outgoing planes by destination: (global plane, data).
    std::vector<std::vector<int>> index(static_cast<std::size_t>(size));
    std::vector<std::vector<const float*>> data(static_cast<std::size_t>(size));
    for (long e = 0; e < 2 * G; ++e) {
      const long g = e < G ? s0 - G + e : s0 + ln0 + (e - G);
      const long t = floor_mod(g, N0);
      const float* src = e < G ? low.data() + static_cast<std::size_t>(e) * plane
                               : high.data() + static_cast<std::size_t>(e - G) * plane;
      const int q = owner(t);
      index[static_cast<std::size_t>(q)].push_back(static_cast<int>(t));
      data[static_cast<std::size_t>(q)].push_back(src);
    }
    std::vector<int> send_n(static_cast<std::size_t>(size)), recv_n(static_cast<std::size_t>(size));
    for (int q = 0; q < size; ++q) send_n[static_cast<std::size_t>(q)] = static_cast<int>(index[static_cast<std::size_t>(q)].size());
    SPINFLIP_CHECK_MPI(MPI_Alltoall(send_n.data(), 1, MPI_INT, recv_n.data(), 1, MPI_INT, group));
    std::vector<int> send_off(static_cast<std::size_t>(size), 0), recv_off(static_cast<std::size_t>(size), 0);
    for (std::size_t q = 1; q < send_off.size(); ++q) {
      send_off[q] = send_off[q - 1] + send_n[q - 1];
      recv_off[q] = recv_off[q - 1] + recv_n[q - 1];
    }
    const auto n_send = static_cast<std::size_t>(send_off.back() + send_n.back());
    const auto n_recv = static_cast<std::size_t>(recv_off.back() + recv_n.back());
    std::vector<int> send_idx, recv_idx(n_recv);
    std::vector<float> send_buf(n_send * plane), recv_buf(n_recv * plane);
    std::size_t at = 0;
    for (int q = 0; q < size; ++q)
      for (std::size_t p = 0; p < index[static_cast<std::size_t>(q)].size(); ++p, ++at) {
        send_idx.push_back(index[static_cast<std::size_t>(q)][p]);
        std::copy_n(data[static_cast<std::size_t>(q)][p], plane, send_buf.data() + at * plane);
      }
    SPINFLIP_CHECK_MPI(MPI_Alltoallv(send_idx.data(), send_n.data(), send_off.data(), MPI_INT, recv_idx.data(),
                                     recv_n.data(), recv_off.data(), MPI_INT, group));
    if (plane > static_cast<std::size_t>(INT_MAX)) throw InternalError("zeldovich_density: plane too large for MPI");
    MPI_Datatype plane_type;
    SPINFLIP_CHECK_MPI(MPI_Type_contiguous(static_cast<int>(plane), MPI_FLOAT, &plane_type));
    SPINFLIP_CHECK_MPI(MPI_Type_commit(&plane_type));
    const int rc = MPI_Alltoallv(send_buf.data(), send_n.data(), send_off.data(), plane_type, recv_buf.data(),
                                 recv_n.data(), recv_off.data(), plane_type, group);
    MPI_Type_free(&plane_type);
    SPINFLIP_CHECK_MPI(rc);
    for (std::size_t p = 0; p < n_recv; ++p) {
      const long rel = recv_idx[p] - s0;
      if (rel < 0 || rel >= ln0) throw InternalError("zeldovich_density: received a plane this rank does not own");
      float* dst = rho.data.data() + static_cast<std::size_t>(rel) * plane;
      const float* src = recv_buf.data() + p * plane;
      for (std::size_t c = 0; c < plane; ++c) dst[c] += src[c];
    }
  }
  SPINFLIP_CHECK_MPI(MPI_Allreduce(MPI_IN_PLACE, &dropped, 1, MPI_DOUBLE, MPI_SUM, group));
  result.dropped_mass = dropped;
  return result;
}

}  // namespace spinflip::sim::detail
