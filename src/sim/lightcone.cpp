// generate_cone: initial conditions → evolved density and velocity term →
// excursion-set ionization (per-cell flags, and z_ion(x) on request) → δT_b.
// Peak memory: three slab fields (the Fourier z = 0 density and two work fields),
// the δT_b field, one byte of flags and two of |k| bin per cell, plus one float
// field per optional output, whatever the number of radii or redshifts.
#include "sim/lightcone.hpp"

#include <algorithm>
#if defined(__SSE2__)
#include <emmintrin.h>
#endif
#include <bit>
#include <climits>
#include <cstdint>
#include <cmath>
#include <limits>
#include <deque>
#include <memory>
#include <numbers>
#include <utility>
#include <string>

#include "core/errors.hpp"
#include "cosmo/cosmology.hpp"
#include "fft/fft.hpp"
#include "fft/planning.hpp"
#include "sim/excursion_set.hpp"
#include "sim/initial_conditions.hpp"
#include "sim/cosmic_dawn.hpp"
#include "sim/mode_bins.hpp"
#include "sim/zeldovich.hpp"

namespace spinflip::sim {
namespace {

/// dst(k) = gain(k∥², k²) · src(k) over this rank's modes (gain evaluated in float).
template <class Gain>
void filter_into(const fft::SlabField& src, fft::SlabField& dst, double cell_mpc, Gain gain) {
  const auto& n = src.global_shape();
  const std::size_t half = src.half_n2();
  std::vector<float> kz2(half), g(half);
  for (std::size_t kh = 0; kh < half; ++kh) {
    double k = 2.0 * std::numbers::pi * static_cast<double>(kh) / (static_cast<double>(n[2]) * cell_mpc);
    kz2[kh] = static_cast<float>(k * k);
  }
  const fft::cfloat* a = src.complex_data();
  fft::cfloat* b = dst.complex_data();
  for (std::size_t i = 0; i < src.local_n0(); ++i) {
    const double k0 = detail::wavenumber(src.local_start0() + i, n[0], cell_mpc);
    for (std::size_t j = 0; j < n[1]; ++j) {
      const double k1 = detail::wavenumber(j, n[1], cell_mpc);
      const auto kp2 = static_cast<float>(k0 * k0 + k1 * k1);
      for (std::size_t kh = 0; kh < half; ++kh) g[kh] = gain(kz2[kh], kp2 + kz2[kh]);
      const std::size_t row = (i * n[1] + j) * half;
      for (std::size_t kh = 0; kh < half; ++kh) b[row + kh] = a[row + kh] * g[kh];
    }
  }
}

/// Z_R(δ): the barrier's inverse read from its uniform-δ table by linear interpolation (−inf
/// below the lowest node, NaN → −inf). One definition for the per-cell passes and the
/// thresholds below, so that both agree to the bit.
struct BarrierLookup {
  const float* table = nullptr;
  int n_table = 0;
  float d0 = 0, inv_dd = 0, lowest = 0;
  explicit BarrierLookup(const detail::Barrier& b)
      : table(b.z_table().data()), n_table(static_cast<int>(b.z_table().size())),
        d0(static_cast<float>(b.table_start())), inv_dd(static_cast<float>(b.table_inverse_step())),
        lowest(static_cast<float>(b.lowest())) {}
};
[[gnu::always_inline]] inline float barrier_z(float d, const float* __restrict table, int n_table, float d0,
                                              float inv_dd, float lowest) {
  const float top = static_cast<float>(n_table - 1);
  const float v = (d - d0) * inv_dd;
  float x = v > 0.0f ? v : 0.0f;  // NaN → 0
  x = x < top ? x : top;
  int g = static_cast<int>(x);
  g = g < n_table - 2 ? g : n_table - 2;
  const float t = x - static_cast<float>(g);
  const float lo = table[g], hi = table[g + 1];
  return d >= lowest ? lo + t * (hi - lo) : -std::numeric_limits<float>::infinity();
}

/// z_ion = max(z_ion, Z_R(δ_R)) over a run of cells. Branch-free so that it vectorizes (with
/// AVX2 gathers on CPUs that have them: the clones use no FMA, so every clone gives the same bits).
__attribute__((target_clones("avx2", "default"))) void raise_z_ion(const float* __restrict d, float* __restrict zi,
                                                                   std::size_t n, const float* __restrict table,
                                                                   int n_table, float d0, float inv_dd, float lowest) {
  for (std::size_t k = 0; k < n; ++k) {
    const float z = barrier_z(d[k], table, n_table, d0, inv_dd, lowest);
    zi[k] = zi[k] > z ? zi[k] : z;
  }
}

/// ionized |= δ_R ≥ threshold over one row (the threshold of each LOS cell's redshift).
__attribute__((target_clones("avx2", "default"))) void flag_ionized(const float* __restrict d,
                                                                    const float* __restrict threshold,
                                                                    std::uint8_t* __restrict ionized, std::size_t n) {
  for (std::size_t k = 0; k < n; ++k) ionized[k] |= d[k] >= threshold[k] ? std::uint8_t{1} : std::uint8_t{0};
}

/// Floats in the order of their values as 32-bit integers (−0 and +0 both map to 0).
std::int64_t float_order(float f) {
  const auto b = std::bit_cast<std::int32_t>(f);
  return b >= 0 ? b : static_cast<std::int64_t>(INT32_MIN) - b;
}
float order_float(std::int64_t o) {
  return std::bit_cast<float>(static_cast<std::int32_t>(o >= 0 ? o : static_cast<std::int64_t>(INT32_MIN) - o));
}

/// The smallest δ with Z_R(δ) ≥ z (Z_R as barrier_z evaluates it; +inf if none): a cell at
/// redshift z is ionized by this radius exactly when δ_R ≥ threshold, since Z_R is
/// non-decreasing. Bisection over the ordered floats.
float threshold_for(const BarrierLookup& b, float z) {
  auto zr = [&](float d) { return barrier_z(d, b.table, b.n_table, b.d0, b.inv_dd, b.lowest); };
  if (zr(b.lowest) >= z) return b.lowest;
  const float top = std::numeric_limits<float>::max();
  if (!(zr(top) >= z)) return std::numeric_limits<float>::infinity();
  std::int64_t lo = float_order(b.lowest), hi = float_order(top);  // zr(lo) < z <= zr(hi)
  while (hi - lo > 1) {
    const std::int64_t mid = lo + (hi - lo) / 2;
    (zr(order_float(mid)) >= z ? hi : lo) = mid;
  }
  return order_float(hi);
}

/// The generator's work storage (Fourier field, work fields, |k| bins, ionized flags). On a single-rank
/// group it is kept per thread between cones of the same shape and cell size: fresh fields
/// cost their page faults and FFTW plans on every cone (each about a transform's time). Rank
/// groups, which exist because a cone is too large for one rank, allocate it per cone.
struct WorkStorage {
  std::array<std::size_t, 3> shape{0, 0, 0};
  double cell_mpc = 0;
  std::size_t plan_epoch = 0;         // the planner's epoch its fields were planned in
  std::deque<fft::SlabField> fields;  // [0]: the z = 0 Fourier density; [1..]: work fields (stable references)
  std::optional<detail::ModeBins> bins;
  std::vector<std::uint8_t> ionized;  // 1: ionized at the cell's own redshift by some radius
};

WorkStorage& kept_storage(const std::array<std::size_t, 3>& shape, double cell_mpc, MPI_Comm group,
                          std::unique_ptr<WorkStorage>& local) {
  int size = 1;
  SPINFLIP_CHECK_MPI(MPI_Comm_size(group, &size));
  if (size > 1) {
    local = std::make_unique<WorkStorage>();
  } else {
    thread_local std::unique_ptr<WorkStorage> kept;
    // A new wisdom (fft::use_wisdom) may change the plans: the kept fields are re-planned.
    if (!kept || kept->shape != shape || kept->cell_mpc != cell_mpc || kept->plan_epoch != fft::plan_epoch()) {
      kept.reset();
      kept = std::make_unique<WorkStorage>();
      kept->plan_epoch = fft::plan_epoch();
    }
    local.reset();
    return *kept;
  }
  return *local;
}

/// Field i of the storage, made on first use.
fft::SlabField& field(WorkStorage& w, std::size_t i, MPI_Comm group) {
  while (w.fields.size() <= i) w.fields.emplace_back(w.shape, group);
  return w.fields[i];
}

void allreduce_sum(std::vector<double>& v, MPI_Comm group) {
  SPINFLIP_CHECK_MPI(MPI_Allreduce(MPI_IN_PLACE, v.data(), static_cast<int>(v.size()), MPI_DOUBLE, MPI_SUM, group));
}

/// Photon conservation (docs/lightcone.md): the box's excursion-set ionized fraction as a function of
/// redshift, Q_es(z) = fraction of cells with z_ion ≥ z (from integer counts, so identical on every
/// rank), is matched to the source model's photon budget Q(z) = min(1, F̄(z)) (ζ f̄_coll for constant
/// ζ): a cell at redshift z is flagged ionized when z_ion ≥ z', Q_es(z') = Q(z). The redshift remap
/// of Park, Greig & Mesinger (2022) applied to the per-cell reionization redshifts.
void conserve_photons(const LightCone& cone, const core::Array3<float>& z_ion, const detail::Efficiency& eff,
                      const detail::MassVariance& mv, const ConeSettings& s, const cosmo::Cosmology& c, double z_lo,
                      double z_hi, std::uint8_t* ionized, MPI_Comm group) {
  const std::size_t nb = 2048, nl = cone.z.size();
  const double dz = (z_hi - z_lo) / static_cast<double>(nb);
  std::vector<std::uint64_t> count(nb + 1, 0);  // bin b: z_ion in [z_lo + b dz, z_lo + (b+1) dz); nb: above
  std::uint64_t cells = 0;
  for (float v : z_ion.data) {
    ++cells;
    if (!(static_cast<double>(v) >= z_lo)) continue;
    const auto b = std::min(static_cast<std::size_t>((static_cast<double>(v) - z_lo) / dz), nb);
    ++count[b];
  }
  SPINFLIP_CHECK_MPI(MPI_Allreduce(MPI_IN_PLACE, count.data(), static_cast<int>(count.size()), MPI_UINT64_T, MPI_SUM, group));
  SPINFLIP_CHECK_MPI(MPI_Allreduce(MPI_IN_PLACE, &cells, 1, MPI_UINT64_T, MPI_SUM, group));
  // q_es[b] = fraction with z_ion ≥ z_lo + b dz (non-increasing in b).
  std::vector<double> q_es(nb + 1, 0.0);
  std::uint64_t above = count[nb];
  q_es[nb] = static_cast<double>(above) / static_cast<double>(cells);
  for (std::size_t b = nb; b-- > 0;) {
    above += count[b];
    q_es[b] = static_cast<double>(above) / static_cast<double>(cells);
  }
  std::vector<float> z_eff(nl);
  for (std::size_t k = 0; k < nl; ++k) {
    const double z = cone.z[k], growth = c.growth_factor(z);
    const double smin = mv.sigma2(detail::min_halo_mass(s.min_virial_temperature_K, z, c));
    const double target =
        std::min(1.0, detail::ionizing_yield(eff, mv, detail::delta_collapse / (growth * std::sqrt(2.0 * smin)), 0.0, smin));
    // The highest z' with Q_es(z') ≥ target (linear within a bin); none: above every z_ion.
    double zp = std::numeric_limits<double>::infinity();
    if (target > 0.0 && q_es[0] >= target) {
      std::size_t b = 0;
      while (b < nb && q_es[b + 1] >= target) ++b;
      const double lo = q_es[b], hi = b < nb ? q_es[b + 1] : 0.0;
      const double t = lo > hi ? std::clamp((lo - target) / (lo - hi), 0.0, 1.0) : 0.0;
      zp = z_lo + (static_cast<double>(b) + t) * dz;
    } else if (target > 0.0) {
      zp = z_lo;  // the budget asks for more than the box ever ionizes in the tables
    }
    z_eff[k] = static_cast<float>(zp);
  }
  const std::size_t rows = z_ion.shape[0] * z_ion.shape[1];
  for (std::size_t r = 0; r < rows; ++r) {
    const float* zi = z_ion.data.data() + r * nl;
    std::uint8_t* f = ionized + r * nl;
    for (std::size_t k = 0; k < nl; ++k) f[k] = zi[k] >= z_eff[k] ? std::uint8_t{1} : std::uint8_t{0};
  }
}

/// The spin temperature of every cell at its own redshift (sim/cosmic_dawn.cpp): δT_b is multiplied
/// by (1 − T_CMB/T_S), and the plane means of T_K, T_S, x_α and x_e are kept.
void apply_spin_temperature(const ConeSettings& s, const cosmo::Cosmology& c, LightCone& cone,
                            const fft::SlabField& lin, fft::SlabField& work, const detail::ModeBins& bins,
                            MPI_Comm group) {
  const std::size_t nl = s.n_los, rows = cone.local_n0 * s.n_perp;
  const detail::DawnCells dawn = detail::dawn_cells(s, c, cone.z, lin, work, bins, group);
  std::vector<double> tk(nl, 0.0), ts(nl, 0.0), xa(nl, 0.0), xe(nl, 0.0);
  if (s.keep_spin) {
    cone.spin_K.emplace(cone.local_n0, s.n_perp, nl);
    cone.gas_K.emplace(cone.local_n0, s.n_perp, nl);
  }
  float* tb = cone.delta_tb_mK.data.data();
  for (std::size_t r = 0; r < rows; ++r)
    for (std::size_t k = 0; k < nl; ++k) {
      const std::size_t q = r * nl + k;
      const double t_gas = dawn.gas_K.data[q], x_e = dawn.x_e.data[q];
      const detail::CellSpin sp =
          detail::cell_spin(cone.z[k], t_gas, x_e, dawn.lyman_alpha.data[q], 1.0 + dawn.density.data[q], c);
      tb[q] *= static_cast<float>(1.0 - c.parameters().T_cmb_K * (1.0 + cone.z[k]) / sp.T_s_K);
      tk[k] += t_gas;
      ts[k] += sp.T_s_K;
      xa[k] += sp.x_alpha;
      xe[k] += x_e;
      if (s.keep_spin) {
        cone.spin_K->data[q] = static_cast<float>(sp.T_s_K);
        cone.gas_K->data[q] = static_cast<float>(t_gas);
      }
    }
  for (auto* v : {&tk, &ts, &xa, &xe}) {
    allreduce_sum(*v, group);
    for (double& x : *v) x /= static_cast<double>(s.n_perp * s.n_perp);
  }
  cone.tk_mean_K = std::move(tk);
  cone.ts_mean_K = std::move(ts);
  cone.x_alpha_mean = std::move(xa);
  cone.x_e_mean = std::move(xe);
}

}  // namespace

detail::Efficiency detail::ionizing_efficiency_of(const ConeSettings& s) {
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
        s.tanh_spin.enabled ? 1.0 - t_cmb0 * (1.0 + z) / s.tanh_spin.spin_temperature_K(z, t_cmb0) : 1.0;
    tb0[k] = cosmo::tb_prefactor_mK(z, c) * spin_factor;
  }

  std::unique_ptr<WorkStorage> own;  // the storage of a rank group's cone (freed on return)
  WorkStorage& ws = kept_storage(shape, dx, group, own);
  ws.shape = shape;
  ws.cell_mpc = dx;
  fft::SlabField& lin = field(ws, 0, group);
  detail::draw_linear_density(lin, dx, c, key);
  if (s.uniform_density) std::fill_n(lin.complex_data(), lin.local_n0() * np * lin.half_n2(), fft::cfloat{0, 0});
  fft::SlabField& work = field(ws, 1, group);
  const std::size_t n0 = lin.local_n0();
  cone.local_start0 = lin.local_start0();
  cone.local_n0 = n0;

  // Evolved linear density; (1 + δ) clamped at 0 where linear theory overshoots (common practice).
  // With the Zel'dovich option the density is moved instead; ionization and the velocity term
  // still use the linear field (docs/lightcone.md).
  // Per-LOS-cell factors in float: the passes below are memory-bound and vectorize.
  std::vector<float> growth_f(nl), tb0_f(nl), fd_f(nl);
  for (std::size_t k = 0; k < nl; ++k) {
    growth_f[k] = static_cast<float>(growth[k]);
    tb0_f[k] = static_cast<float>(tb0[k]);
    fd_f[k] = static_cast<float>(rate[k] * growth[k]);
  }
  cone.delta_tb_mK = core::Array3<float>(n0, np, nl);
  auto& tb = cone.delta_tb_mK;
  if (s.keep_density) cone.density.emplace(n0, np, nl);
  if (s.zeldovich_displacement) {
    // 1 + δ from the Zel'dovich deposit (sim/zeldovich.cpp), left in tb; no clamp is needed
    // (a deposit is never negative). Three transforms (ψ) instead of the linear density's one.
    detail::zeldovich_density(lin, dx, growth, {&work, &field(ws, 2, group), &field(ws, 3, group)}, tb, group);
    for (std::size_t i = 0; i < n0; ++i)
      for (std::size_t j = 0; j < np; ++j) {
        float* t = &tb(i, j, 0);
        if (cone.density) {
          float* dens = &(*cone.density)(i, j, 0);
          for (std::size_t k = 0; k < nl; ++k) dens[k] = t[k] - 1.0f;
        }
        for (std::size_t k = 0; k < nl; ++k) t[k] *= tb0_f[k];
      }
  } else {
    const std::size_t local_modes = n0 * np * lin.half_n2();
    std::copy_n(lin.complex_data(), local_modes, work.complex_data());
    work.inverse();
    for (std::size_t i = 0; i < n0; ++i)
      for (std::size_t j = 0; j < np; ++j) {
        const float* w = &work.real(i, j, 0);
        float* t = &tb(i, j, 0);
        for (std::size_t k = 0; k < nl; ++k) t[k] = tb0_f[k] * (1.0f + std::max(growth_f[k] * w[k], -1.0f));
        if (cone.density) {
          float* dens = &(*cone.density)(i, j, 0);
          for (std::size_t k = 0; k < nl; ++k) dens[k] = std::max(growth_f[k] * w[k], -1.0f);
        }
      }
  }

  // Linear velocity gradient H⁻¹ dv_r/dr = −f D μ² δ0(k), clamped to ±velocity_gradient_max.
  if (s.velocity_gradient) {
    filter_into(lin, work, dx, [](float kz2, float k2) { return k2 > 0 ? -kz2 / k2 : 0.0f; });
    work.inverse();
    const auto cap = static_cast<float>(s.velocity_gradient_max);
    for (std::size_t i = 0; i < n0; ++i)
      for (std::size_t j = 0; j < np; ++j) {
        const float* w = &work.real(i, j, 0);
        float* t = &tb(i, j, 0);
        for (std::size_t k = 0; k < nl; ++k) t[k] /= 1.0f + std::clamp(fd_f[k] * w[k], -cap, cap);
      }
  }

  if (!ws.bins && (s.reionization || s.spin.enabled)) ws.bins.emplace(lin, dx);
  if (s.spin.enabled) apply_spin_temperature(s, c, cone, lin, work, *ws.bins, group);

  std::vector<double> x_hi_sum(nl, 0.0), tb_sum(nl, 0.0);
  if (s.reionization) {
    // Per cell: ionized at its own redshift or not (δT_b needs no more), and z_ion(x) when the
    // caller keeps it (the same barrier lookups: a cell is flagged exactly when z_ion ≥ its z).
    ws.ionized.assign(n0 * np * nl, 0);
    std::uint8_t* ionized = ws.ionized.data();
    core::Array3<float> z_ion;
    // Photon conservation reads the whole box's z_ion (below), so it needs the field.
    const bool need_z_ion = s.keep_z_ion || s.photon_conservation;
    if (need_z_ion) z_ion = core::Array3<float>(n0, np, nl, -std::numeric_limits<float>::infinity());
    // The redshift each LOS cell is compared at: the smallest float ≥ z_k (z_ion is a float).
    std::vector<float> z_cell(nl);
    for (std::size_t k = 0; k < nl; ++k) {
      z_cell[k] = static_cast<float>(cone.z[k]);
      if (static_cast<double>(z_cell[k]) < cone.z[k])
        z_cell[k] = std::nextafter(z_cell[k], std::numeric_limits<float>::infinity());
    }
    std::vector<float> threshold(nl);
    const detail::Efficiency eff = detail::ionizing_efficiency_of(s);

    // Redshift nodes of the barrier tables span the cone with a small margin.
    const std::size_t nz = 96;
    // With photon conservation a cell may be compared at a lower redshift than its own: the
    // tables then reach down to (1+z) × 0.8 (an excursion set lags its photon budget by ≲ 10 %).
    const double z_lo = s.photon_conservation ? std::max(0.5, 0.8 * (1.0 + cone.z.front()) - 1.0) : cone.z.front() - 0.01;
    const double z_hi = cone.z.back() + 0.01;
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

    const detail::ModeBins& bins = *ws.bins;
    // The radii whose barrier some cell can reach, and always the last (r_min: its smoothed field
    // also gives the cells' own collapsed fraction below).
    struct Radius {
      double radius;
      std::optional<detail::Barrier> barrier;
    };
    std::vector<Radius> radii;
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
      detail::Barrier barrier(zn, crit);
      const bool reachable = std::isfinite(barrier.lowest());
      if (reachable || r + 1 == s.n_radii)
        radii.push_back({radius, reachable ? std::optional<detail::Barrier>(std::move(barrier)) : std::nullopt});
    }
    // Radii go in pairs of smoothed fields: the transforms are the same, but the Fourier field
    // and the bins are read once per pair. Peak memory: 2 work fields, whatever the number of radii.
    const std::size_t batch_size = std::min(detail::ModeBins::max_batch, radii.size());
    std::vector<fft::SlabField*> fields;
    for (std::size_t f = 0; f < batch_size; ++f) fields.push_back(&field(ws, 1 + f, group));
    std::vector<float> gains, one;
    fft::SlabField* cell_scale = nullptr;  // δ0 smoothed on r_min, in real space
    for (std::size_t r0 = 0; r0 < radii.size(); r0 += batch_size) {
      const std::size_t m = std::min(batch_size, radii.size() - r0);
      double rad[detail::ModeBins::max_batch];
      for (std::size_t i = 0; i < m; ++i) rad[i] = radii[r0 + i].radius;
      bins.smooth(lin, fields.data(), rad, m, gains, one);
      for (std::size_t i = 0; i < m; ++i) fields[i]->inverse();
      for (std::size_t f = 0; f < m; ++f) {
        const auto& barrier = radii[r0 + f].barrier;
        if (!barrier) continue;
        const BarrierLookup look(*barrier);
        for (std::size_t k = 0; k < nl; ++k) threshold[k] = threshold_for(look, z_cell[k]);
        const std::size_t pad = fields[f]->padded_n2();
        const float* d = fields[f]->real_data();
        if (!s.photon_conservation)
          for (std::size_t row = 0; row < n0 * np; ++row)
            flag_ionized(d + row * pad, threshold.data(), ionized + row * nl, nl);
        if (need_z_ion)  // one field at a time: its 16 kB table stays in L1 for the gathers
          for (std::size_t row = 0; row < n0 * np; ++row)
            raise_z_ion(d + row * pad, z_ion.data.data() + row * nl, nl, look.table, look.n_table, look.d0,
                        look.inv_dd, look.lowest);
      }
      cell_scale = fields[m - 1];
    }
    if (s.photon_conservation)
      conserve_photons(cone, z_ion, eff, mv, s, c, z_lo, z_hi, ionized, group);
    fft::SlabField& work_cell = *cell_scale;
    // `work_cell` holds δ0 smoothed on the cell scale (the last radius is r_min).
    const double s_cell = mv.sigma2(c.mass_of_radius(r_min));
    // Partial ionization from the cell's own yield F(u), u = max(0, (δc/D − δ_cell)/√(2(σ²_min − σ²_cell))):
    // F tabulated in u on [0, u_top] (constant ζ: ζ erfc(u), one table; mass-dependent: one per LOS
    // cell), read by linear interpolation. erfc(8) ≈ 1e-29, so F = 0 beyond u_top.
    const double u_top = 8.0;
    const std::size_t nu = eff.mass_dependent ? 512 : 16384;  // constant ζ: lerp error ≤ 1e-6 ζ
    std::vector<float> yield_table;
    std::vector<float> a_los(nl), inv_b_los(nl);
    for (std::size_t k = 0; k < nl; ++k) {
      const double smin_k = mv.sigma2(detail::min_halo_mass(s.min_virial_temperature_K, cone.z[k], c));
      a_los[k] = static_cast<float>(detail::delta_collapse / growth[k]);
      // No halo above M_min fits in the cell: u = +inf, F = 0.
      inv_b_los[k] = smin_k > s_cell ? static_cast<float>(1.0 / std::sqrt(2.0 * (smin_k - s_cell))) : 0.0f;
      if (eff.mass_dependent && s.partial_ionization) {
        if (yield_table.empty()) yield_table.resize(nl * nu);
        for (std::size_t q = 0; q < nu; ++q)
          yield_table[k * nu + q] = static_cast<float>(std::min(
              1.0, detail::ionizing_yield(eff, mv, u_top * static_cast<double>(q) / static_cast<double>(nu - 1),
                                          s_cell, smin_k)));
      }
    }
    if (!eff.mass_dependent && s.partial_ionization) {
      yield_table.resize(nu);
      for (std::size_t q = 0; q < nu; ++q)
        yield_table[q] = static_cast<float>(
            std::min(1.0, eff.zeta * std::erfc(u_top * static_cast<double>(q) / static_cast<double>(nu - 1))));
    }
    const auto scale = static_cast<float>(static_cast<double>(nu - 1) / u_top);
    const auto top = static_cast<float>(nu - 1);
    const std::size_t stride = eff.mass_dependent ? nu : 0;

    if (s.keep_x_hi) cone.x_hi.emplace(n0, np, nl);
    std::vector<float> xrow(nl);
    for (std::size_t i = 0; i < n0; ++i)
      for (std::size_t j = 0; j < np; ++j) {
        const std::uint8_t* flag = ionized + (i * np + j) * nl;
        const float* d = &work_cell.real(i, j, 0);
        for (std::size_t k = 0; k < nl; ++k) {
          float x_hi = 1.0f;
          if (flag[k] != 0) {
            x_hi = 0.0f;
          } else if (s.partial_ionization && inv_b_los[k] > 0.0f) {
            const float u = std::max(0.0f, (a_los[k] - d[k]) * inv_b_los[k]);
            const float x = std::min(top, u * scale);
            const auto q = std::min(static_cast<std::size_t>(x), nu - 2);
            const float w = x - static_cast<float>(q);
            const float* y = yield_table.data() + k * stride + q;
            x_hi = 1.0f - (y[0] + w * (y[1] - y[0]));
          }
          xrow[k] = x_hi;
        }
        float* t = &tb(i, j, 0);
        for (std::size_t k = 0; k < nl; ++k) {
          t[k] *= xrow[k];
          x_hi_sum[k] += xrow[k];
          tb_sum[k] += t[k];
        }
        if (cone.x_hi) std::copy(xrow.begin(), xrow.end(), &(*cone.x_hi)(i, j, 0));
      }
    if (s.keep_z_ion) cone.z_ion = std::move(z_ion);
  } else {
    for (std::size_t k = 0; k < nl; ++k) x_hi_sum[k] = static_cast<double>(n0 * np);
    if (s.keep_x_hi) cone.x_hi.emplace(n0, np, nl, 1.0f);
    for (std::size_t i = 0; i < n0; ++i)
      for (std::size_t j = 0; j < np; ++j) {
        const float* t = &tb(i, j, 0);
        for (std::size_t k = 0; k < nl; ++k) tb_sum[k] += t[k];
      }
  }

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
