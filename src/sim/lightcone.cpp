// generate_cone: initial conditions → evolved density and velocity term →
// excursion-set z_ion(x) → δT_b. Peak memory: two slab fields (the Fourier
// z = 0 density and one work field) plus three float fields (δT_b, z_ion and
// one optional output each), whatever the number of radii or redshifts.
#include "sim/lightcone.hpp"

#include <algorithm>
#include <climits>
#include <cstdint>
#include <cmath>
#include <limits>
#include <numbers>
#include <string>

#include "core/errors.hpp"
#include "cosmo/cosmology.hpp"
#include "fft/fft.hpp"
#include "sim/excursion_set.hpp"
#include "sim/initial_conditions.hpp"

namespace spinflip::sim {
namespace {

/// dst(k) = gain(k∥², k²) · src(k) over this rank's modes.
template <class Gain>
void filter_into(fft::SlabField& src, fft::SlabField& dst, double cell_mpc, Gain gain) {
  const auto& n = src.global_shape();
  const std::size_t half = src.half_n2();
  std::vector<double> kz2(half);
  for (std::size_t kh = 0; kh < half; ++kh) {
    double k = 2.0 * std::numbers::pi * static_cast<double>(kh) / (static_cast<double>(n[2]) * cell_mpc);
    kz2[kh] = k * k;
  }
  for (std::size_t i = 0; i < src.local_n0(); ++i) {
    const double k0 = detail::wavenumber(src.local_start0() + i, n[0], cell_mpc);
    for (std::size_t j = 0; j < n[1]; ++j) {
      const double k1 = detail::wavenumber(j, n[1], cell_mpc);
      const double kp2 = k0 * k0 + k1 * k1;
      const fft::cfloat* a = &src.mode(i, j, 0);
      fft::cfloat* b = &dst.mode(i, j, 0);
      for (std::size_t kh = 0; kh < half; ++kh) b[kh] = a[kh] * static_cast<float>(gain(kz2[kh], kp2 + kz2[kh]));
    }
  }
}

/// Top-hat window in Fourier space (common practice).
double top_hat(double x) { return x < 1e-3 ? 1.0 - x * x / 10.0 : 3.0 * (std::sin(x) - x * std::cos(x)) / (x * x * x); }

/// |k| of every local mode rounded to one of 65536 bins (2 bytes per mode): a radius's window is
/// then a table of 65536 gains, and smoothing is a gather and a multiply per mode. The bin width
/// is k_max/65535, so kR is off by at most k_max R/131070 (≤ 1e-3 for R ≤ 40 cells).
struct ModeBins {
  double dk = 1;
  std::vector<std::uint16_t> bin;
  ModeBins(const fft::SlabField& f, double cell_mpc) {
    const auto& n = f.global_shape();
    const double pi = std::numbers::pi;
    const double k_top = std::sqrt(3.0) * pi / cell_mpc * 1.0001;
    dk = k_top / 65535.0;
    const std::size_t half = f.half_n2();
    bin.resize(f.local_n0() * n[1] * half);
    std::size_t q = 0;
    for (std::size_t i = 0; i < f.local_n0(); ++i) {
      const double k0 = detail::wavenumber(f.local_start0() + i, n[0], cell_mpc);
      for (std::size_t j = 0; j < n[1]; ++j) {
        const double k1 = detail::wavenumber(j, n[1], cell_mpc);
        for (std::size_t kh = 0; kh < half; ++kh) {
          const double k2 = 2.0 * pi * static_cast<double>(kh) / (static_cast<double>(n[2]) * cell_mpc);
          bin[q++] = static_cast<std::uint16_t>(std::lround(std::sqrt(k0 * k0 + k1 * k1 + k2 * k2) / dk));
        }
      }
    }
  }
  /// dst = W(|k| R) src over the local modes.
  void smooth(const fft::SlabField& src, fft::SlabField& dst, double radius, std::vector<float>& gain) const {
    gain.resize(65536);
    for (std::size_t b = 0; b < gain.size(); ++b) gain[b] = static_cast<float>(top_hat(static_cast<double>(b) * dk * radius));
    const fft::cfloat* a = src.complex_data();
    fft::cfloat* out = dst.complex_data();
    const std::size_t n = bin.size();
    for (std::size_t q = 0; q < n; ++q) out[q] = a[q] * gain[bin[q]];
  }
};

detail::Efficiency efficiency_of(const ConeSettings& s) {
  detail::Efficiency e;
  e.mass_dependent = s.model == SourceModel::mass_dependent;
  e.zeta = s.ionizing_efficiency;
  e.photons_per_baryon = s.ionizing_photons_per_baryon;
  e.fstar10 = s.star_fraction_at_1e10;
  e.alpha_star = s.star_fraction_slope;
  e.fesc10 = s.escape_fraction_at_1e10;
  e.alpha_esc = s.escape_fraction_slope;
  e.m_turn_msun = s.turnover_mass_msun;
  return e;
}

void allreduce_sum(std::vector<double>& v, MPI_Comm group) {
  SPINFLIP_CHECK_MPI(MPI_Allreduce(MPI_IN_PLACE, v.data(), static_cast<int>(v.size()), MPI_DOUBLE, MPI_SUM, group));
}

}  // namespace

LightCone generate_cone(const ConeSettings& s, const cosmo::Cosmology& c, const rng::EntryKey& key,
                        MPI_Comm group) {
  check_settings(s, c);
  const std::size_t np = s.n_perp, nl = s.n_los;
  const std::array<std::size_t, 3> shape{np, np, nl};
  const double dx = s.cell_mpc;

  LightCone cone;
  cone.global_shape = shape;
  cone.cell_mpc = dx;
  const double d_near = c.comoving_distance_mpc(s.z_min);
  cone.distance_mpc.resize(nl);
  cone.z.resize(nl);
  cone.freq_MHz.resize(nl);
  std::vector<double> growth(nl), rate(nl), tb0(nl);
  for (std::size_t k = 0; k < nl; ++k) {
    cone.distance_mpc[k] = d_near + (static_cast<double>(k) + 0.5) * dx;
    const double z = c.redshift_at_comoving_distance(cone.distance_mpc[k]);
    cone.z[k] = z;
    cone.freq_MHz[k] = cosmo::frequency_MHz(z);
    growth[k] = c.growth_factor(z);
    rate[k] = c.growth_rate(z);
    const double t_cmb0 = c.parameters().T_cmb_K;
    const double spin_factor =
        s.spin.enabled ? 1.0 - t_cmb0 * (1.0 + z) / s.spin.spin_temperature_K(z, t_cmb0) : 1.0;
    tb0[k] = cosmo::tb_prefactor_mK(z, c) * spin_factor;
  }

  fft::SlabField lin(shape, group);
  detail::draw_linear_density(lin, dx, c, key);
  fft::SlabField work(shape, group);
  const std::size_t n0 = lin.local_n0();
  cone.local_start0 = lin.local_start0();
  cone.local_n0 = n0;

  // Evolved linear density; (1 + δ) clamped at 0 where linear theory overshoots (common practice).
  filter_into(lin, work, dx, [](double, double) { return 1.0; });
  work.inverse();
  cone.delta_tb_mK = core::Array3<float>(n0, np, nl);
  auto& tb = cone.delta_tb_mK;
  if (s.keep_density) cone.density.emplace(n0, np, nl);
  for (std::size_t i = 0; i < n0; ++i)
    for (std::size_t j = 0; j < np; ++j)
      for (std::size_t k = 0; k < nl; ++k) {
        const double d = std::max(growth[k] * work.real(i, j, k), -1.0);
        tb(i, j, k) = static_cast<float>(tb0[k] * (1.0 + d));
        if (cone.density) (*cone.density)(i, j, k) = static_cast<float>(d);
      }

  // Linear velocity gradient H⁻¹ dv_r/dr = −f D μ² δ0(k), clamped to ±velocity_gradient_max.
  if (s.velocity_gradient) {
    filter_into(lin, work, dx, [](double kz2, double k2) { return k2 > 0 ? -kz2 / k2 : 0.0; });
    work.inverse();
    const double cap = s.velocity_gradient_max;
    for (std::size_t i = 0; i < n0; ++i)
      for (std::size_t j = 0; j < np; ++j)
        for (std::size_t k = 0; k < nl; ++k) {
          const double g = std::clamp(rate[k] * growth[k] * work.real(i, j, k), -cap, cap);
          tb(i, j, k) = static_cast<float>(tb(i, j, k) / (1.0 + g));
        }
  }

  std::vector<double> x_hi_sum(nl, 0.0);
  if (s.reionization) {
    const double ninf = -std::numeric_limits<double>::infinity();
    core::Array3<float> z_ion(n0, np, nl, static_cast<float>(ninf));
    const detail::Efficiency eff = efficiency_of(s);

    // Redshift nodes of the barrier tables span the cone with a small margin.
    const std::size_t nz = 96;
    const double z_lo = cone.z.front() - 0.01, z_hi = cone.z.back() + 0.01;
    std::vector<double> zn(nz), dn(nz), mmin(nz);
    for (std::size_t t = 0; t < nz; ++t) {
      zn[t] = z_lo + (z_hi - z_lo) * static_cast<double>(t) / static_cast<double>(nz - 1);
      dn[t] = c.growth_factor(zn[t]);
      mmin[t] = detail::min_halo_mass(s.min_virial_temperature_K, zn[t], c);
    }
    const double r_min = dx * std::cbrt(3.0 / (4.0 * std::numbers::pi));  // sphere of one cell's volume
    const double r_max = s.bubble_radius_max_mpc;
    const double m_lo = std::min(1e3, 0.5 * *std::min_element(mmin.begin(), mmin.end()));
    const double m_hi = 2.0 * std::max(c.mass_of_radius(r_max), 1e3 * m_lo);
    const detail::MassVariance mv(c, m_lo, m_hi, 480);
    std::vector<double> smin(nz);
    for (std::size_t t = 0; t < nz; ++t) smin[t] = mv.sigma2(mmin[t]);

    const ModeBins bins(lin, dx);
    std::vector<float> gain;
    for (std::size_t r = 0; r < s.n_radii; ++r) {
      const double frac = static_cast<double>(r) / static_cast<double>(s.n_radii - 1);
      const double radius = r_max * std::pow(r_min / r_max, frac);
      const double s_r = mv.sigma2(c.mass_of_radius(radius));
      std::vector<double> crit(nz);
      for (std::size_t t = 0; t < nz; ++t) {
        const double u = detail::critical_u(eff, mv, s_r, smin[t]);
        crit[t] = u < 0 ? std::numeric_limits<double>::infinity()
                        : detail::delta_collapse / dn[t] - u * std::sqrt(2.0 * (smin[t] - s_r));
      }
      const detail::Barrier barrier(zn, crit);
      if (!std::isfinite(barrier.lowest())) continue;  // no cell can be ionized at this radius
      bins.smooth(lin, work, radius, gain);
      work.inverse();
      // Cells below the lowest barrier (most of them at large radii) cost one comparison; cells
      // already ionized at the top of the table cannot rise further.
      const float lowest = static_cast<float>(barrier.lowest());
      const float z_top = static_cast<float>(barrier.highest_redshift());
      for (std::size_t i = 0; i < n0; ++i)
        for (std::size_t j = 0; j < np; ++j) {
          const float* d = &work.real(i, j, 0);
          float* zi = &z_ion(i, j, 0);
          for (std::size_t k = 0; k < nl; ++k)
            if (d[k] >= lowest && zi[k] < z_top)
              zi[k] = std::max(zi[k], static_cast<float>(barrier.redshift_reached(d[k])));
        }
    }
    // `work` now holds δ0 smoothed on the cell scale (the last radius is r_min).
    const double s_cell = mv.sigma2(c.mass_of_radius(r_min));
    // Partial ionization from the cell's own yield, per LOS cell: F(u) tabulated in u.
    const std::size_t nu = 512;
    const double u_top = 8.0;
    std::vector<double> smin_los(nl), yield_table;
    for (std::size_t k = 0; k < nl; ++k)
      smin_los[k] = mv.sigma2(detail::min_halo_mass(s.min_virial_temperature_K, cone.z[k], c));
    if (s.partial_ionization && eff.mass_dependent) {
      yield_table.resize(nl * nu);
      for (std::size_t k = 0; k < nl; ++k)
        for (std::size_t q = 0; q < nu; ++q)
          yield_table[k * nu + q] = detail::ionizing_yield(
              eff, mv, u_top * static_cast<double>(q) / static_cast<double>(nu - 1), s_cell, smin_los[k]);
    }
    auto partial = [&](std::size_t k, double delta0) -> double {
      if (!(smin_los[k] > s_cell)) return 0.0;
      const double u = std::max(0.0, (detail::delta_collapse / growth[k] - delta0) /
                                         std::sqrt(2.0 * (smin_los[k] - s_cell)));
      if (!eff.mass_dependent) return std::min(1.0, eff.zeta * std::erfc(u));
      if (u >= u_top) return 0.0;
      const double x = u / u_top * static_cast<double>(nu - 1);
      const auto q = std::min(static_cast<std::size_t>(x), nu - 2);
      const double w = x - static_cast<double>(q);
      return std::min(1.0, yield_table[k * nu + q] * (1 - w) + yield_table[k * nu + q + 1] * w);
    };

    if (s.keep_x_hi) cone.x_hi.emplace(n0, np, nl);
    for (std::size_t i = 0; i < n0; ++i)
      for (std::size_t j = 0; j < np; ++j)
        for (std::size_t k = 0; k < nl; ++k) {
          double x_hi = 1.0;
          if (z_ion(i, j, k) >= cone.z[k]) {
            x_hi = 0.0;
          } else if (s.partial_ionization) {
            x_hi = 1.0 - partial(k, work.real(i, j, k));
          }
          tb(i, j, k) = static_cast<float>(tb(i, j, k) * x_hi);
          if (cone.x_hi) (*cone.x_hi)(i, j, k) = static_cast<float>(x_hi);
          x_hi_sum[k] += x_hi;
        }
    if (s.keep_z_ion) cone.z_ion = std::move(z_ion);
  } else {
    for (std::size_t k = 0; k < nl; ++k) x_hi_sum[k] = static_cast<double>(n0 * np);
    if (s.keep_x_hi) cone.x_hi.emplace(n0, np, nl, 1.0f);
  }

  std::vector<double> tb_sum(nl, 0.0);
  for (std::size_t i = 0; i < n0; ++i)
    for (std::size_t j = 0; j < np; ++j)
      for (std::size_t k = 0; k < nl; ++k) tb_sum[k] += tb(i, j, k);
  allreduce_sum(x_hi_sum, group);
  allreduce_sum(tb_sum, group);
  const double plane = static_cast<double>(np * np);
  cone.x_hi_mean.resize(nl);
  cone.tb_mean_mK.resize(nl);
  for (std::size_t k = 0; k < nl; ++k) {
    cone.x_hi_mean[k] = x_hi_sum[k] / plane;
    cone.tb_mean_mK[k] = tb_sum[k] / plane;
  }
  return cone;
}

core::Array3<float> allgather_field(const LightCone& cone, const core::Array3<float>& local, MPI_Comm group) {
  const auto& n = cone.global_shape;
  int size = 1;
  SPINFLIP_CHECK_MPI(MPI_Comm_size(group, &size));
  const std::size_t plane = n[1] * n[2];
  if (plane > static_cast<std::size_t>(INT_MAX)) throw InternalError("allgather_field: plane too large for MPI");
  if (local.shape[0] != cone.local_n0 || local.shape[1] != n[1] || local.shape[2] != n[2])
    throw InternalError("allgather_field: field does not match the cone's slab");
  int mine[2] = {static_cast<int>(cone.local_n0), static_cast<int>(cone.local_start0)};
  std::vector<int> all(2 * static_cast<std::size_t>(size));
  SPINFLIP_CHECK_MPI(MPI_Allgather(mine, 2, MPI_INT, all.data(), 2, MPI_INT, group));
  std::vector<int> counts(static_cast<std::size_t>(size)), displs(static_cast<std::size_t>(size));
  for (std::size_t r = 0; r < counts.size(); ++r) {
    counts[r] = all[2 * r];
    displs[r] = all[2 * r + 1];
  }
  MPI_Datatype plane_type;
  SPINFLIP_CHECK_MPI(MPI_Type_contiguous(static_cast<int>(plane), MPI_FLOAT, &plane_type));
  SPINFLIP_CHECK_MPI(MPI_Type_commit(&plane_type));
  core::Array3<float> whole(n[0], n[1], n[2]);
  const int rc = MPI_Allgatherv(local.data.data(), mine[0], plane_type, whole.data.data(), counts.data(),
                                displs.data(), plane_type, group);
  MPI_Type_free(&plane_type);
  SPINFLIP_CHECK_MPI(rc);
  return whole;
}

core::Array3<float> allgather_cone(const LightCone& cone, MPI_Comm group) {
  return allgather_field(cone, cone.delta_tb_mK, group);
}

}  // namespace spinflip::sim
