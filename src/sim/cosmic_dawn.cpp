// Cosmic-dawn radiation fields and the forward integration of T_K and x_e.
//
// At each redshift node z_n the box is read as coeval at z_n. Around every cell the
// sources are summed over spherical shells (Santos et al. 2010; Mesinger, Furlanetto &
// Cen 2011): shell i (radii r_{i-1}..r_i) contributes its volume-averaged star-formation
// rate density at the retarded redshift z''_i of its mid radius, ψ_i(x) = ψ̄(z''_i) g_i(x)/⟨g_i⟩,
// g_i = (1 + D δ_i) dF_*/dt from the EPS conditional stellar fraction of the shell's linear
// overdensity δ_i (one filtered field per shell and node), beyond the last shell the mean ψ̄.
// The radiative-transfer integrals across each shell are scalars per node (weights W_i):
//   J_α   = (1+z)²/(4π) Σ_n f_rec(n) ∫ dr ψ ε_b(ν_n (1+z'')/(1+z))       (Pritchard & Furlanetto 2006)
//   4πJ_X = (1+z)² ∫ dr ψ ε_X(E (1+z'')/(1+z)) e^{−τ(E, r)}
// and the heating and ionization per hydrogen atom follow from 4πJ_X σ_s(E) (Verner et al.
// 1996) with the Shull & van Steenberg (1985) energy fractions. T_K and x_e are integrated by
// Heun's method between nodes (sources linear in z between them).
#include "sim/cosmic_dawn.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <numbers>

#include "core/errors.hpp"
#include "cosmo/cosmology.hpp"
#include "sim/excursion_set.hpp"
#include "sim/lightcone.hpp"
#include "sim/mode_bins.hpp"
#include "sim/spin_temperature.hpp"

namespace spinflip::sim::detail {
namespace {

constexpr double mpc_cm = 3.0856775814913673e24;
constexpr double year_s = 3.15576e7;
constexpr double msun_g = 1.98847e33;
constexpr double proton_g = 1.67262192e-24;
constexpr double xray_top_keV = 10.0;     // harder photons mostly free-stream past the Hubble length
constexpr double xray_band_top_keV = 2.0;  // the luminosity key's band: threshold … 2 keV
constexpr double lyman_spectral_index = 0.14;  // ε_b ∝ ν^{α−1}, Pop II (Barkana & Loeb 2005, from memory)
constexpr double decoupling_redshift = 150.0;  // thermal decoupling (common practice)
constexpr double start_x_e = 2e-4;             // residual ionization at z ≈ 35 (from memory)
// Units of the per-cell float accumulators (keeps them far from float subnormals).
constexpr double energy_unit = 1e-30, count_unit = 1e-20, alpha_unit = 1e-22;
float in_unit(double v, double unit) {
  const double x = v / unit;
  return x > 1e-25 ? static_cast<float>(x) : 0.0f;
}

/// Gauss–Legendre nodes on [−1, 1] (Newton on P_n; common practice).
template <std::size_t N>
struct Gauss {
  std::array<double, N> x{}, w{};
  Gauss() {
    for (std::size_t i = 0; i < N; ++i) {
      double z = std::cos(std::numbers::pi * (static_cast<double>(i) + 0.75) / (static_cast<double>(N) + 0.5)), dp = 1;
      for (int it = 0; it < 100; ++it) {
        double p1 = 1, p2 = 0;
        for (std::size_t j = 1; j <= N; ++j) {
          const double p3 = p2;
          p2 = p1;
          p1 = ((2.0 * static_cast<double>(j) - 1) * z * p2 - (static_cast<double>(j) - 1) * p3) / static_cast<double>(j);
        }
        dp = static_cast<double>(N) * (z * p1 - p2) / (z * z - 1);
        const double dz = p1 / dp;
        z -= dz;
        if (std::abs(dz) < 1e-15) break;
      }
      x[i] = z;
      w[i] = 2.0 / ((1 - z * z) * dp * dp);
    }
  }
};
const Gauss<16>& gauss16() {
  static const Gauss<16> g;
  return g;
}

double lerp_table(const std::vector<double>& y, double x0, double inv_dx, double x) {
  double t = (x - x0) * inv_dx;
  t = std::clamp(t, 0.0, static_cast<double>(y.size() - 1));
  const auto i = std::min(static_cast<std::size_t>(t), y.size() - 2);
  const double w = t - static_cast<double>(i);
  return y[i] * (1 - w) + y[i + 1] * w;
}

/// Everything of the source model and the background cosmology that the nodes need, tabulated
/// on a fine redshift grid.
class SourceHistory {
 public:
  SourceHistory(const ConeSettings& s, const cosmo::Cosmology& c, double z_lo, double z_hi)
      : c_(c), s_(s), z0_(std::max(z_lo - 0.05, 0.0)), mv_(make_mv(s, c, z_hi)) {
    const std::size_t n = 3000;
    const double z1 = z_hi + 0.3;
    dz_ = (z1 - z0_) / static_cast<double>(n - 1);
    const double rho_b = c.mean_matter_density_msun_mpc3() * c.parameters().omega_b / c.parameters().omega_m;
    star_.mass_dependent = s.model == SourceModel::mass_dependent;
    star_.zeta = s.spin.star_fraction;
    star_.photons_per_baryon = 1.0;
    star_.fstar10 = s.star_fraction_at_1e10;
    star_.alpha_star = s.star_fraction_slope;
    star_.fesc10 = 1.0;
    star_.alpha_esc = 0.0;
    star_.m_turn_msun = s.turnover_mass_msun;
    const Efficiency ion = ionizing_efficiency_of(s);
    std::vector<double> fstar(n);
    growth_.resize(n);
    smin_.resize(n);
    dist_.resize(n);
    q_.resize(n);
    for (std::size_t t = 0; t < n; ++t) {
      const double z = z_at(t);
      growth_[t] = c.growth_factor(z);
      smin_[t] = mv_.sigma2(min_halo_mass(s.min_virial_temperature_K, z, c));
      dist_[t] = c.comoving_distance_mpc(z);
      const double u = delta_collapse / (growth_[t] * std::sqrt(2.0 * smin_[t]));
      fstar[t] = ionizing_yield(star_, mv_, u, 0.0, smin_[t]);
      q_[t] = s.reionization ? std::min(1.0, ionizing_yield(ion, mv_, u, 0.0, smin_[t])) : 0.0;
    }
    // ψ̄ = ρ̄_b dF_*/dt = ρ̄_b (−dF_*/dz) H (1+z), per year.
    psi_.resize(n);
    for (std::size_t t = 0; t < n; ++t) {
      const std::size_t a = t == 0 ? 0 : t - 1, b = std::min(t + 1, n - 1);
      const double dfdz = (fstar[b] - fstar[a]) / (z_at(b) - z_at(a));
      psi_[t] = std::max(0.0, -dfdz) * rho_b * hubble_per_s(z_at(t)) * year_s * (1.0 + z_at(t));
    }
  }
  double z_at(std::size_t t) const { return z0_ + dz_ * static_cast<double>(t); }
  double psi(double z) const { return lerp_table(psi_, z0_, 1.0 / dz_, z); }
  double neutral(double z) const { return 1.0 - lerp_table(q_, z0_, 1.0 / dz_, z); }
  double growth(double z) const { return lerp_table(growth_, z0_, 1.0 / dz_, z); }
  double smin(double z) const { return lerp_table(smin_, z0_, 1.0 / dz_, z); }
  double distance(double z) const { return lerp_table(dist_, z0_, 1.0 / dz_, z); }
  /// Redshift at comoving distance d (monotone table inverted by bisection on its nodes).
  double redshift_at(double d) const {
    const auto it = std::upper_bound(dist_.begin(), dist_.end(), d);
    if (it == dist_.begin()) return z0_;
    if (it == dist_.end()) return z_at(dist_.size() - 1);
    const auto i = static_cast<std::size_t>(it - dist_.begin() - 1);
    return z_at(i) + dz_ * (d - dist_[i]) / (dist_[i + 1] - dist_[i]);
  }
  double hubble_per_s(double z) const { return c_.hubble_km_s_mpc(z) / (mpc_cm * 1e-5); }
  double z_top() const { return z_at(psi_.size() - 1); }
  const MassVariance& mass_variance() const { return mv_; }

  /// g(δ0) = (1 + D δ) (−dF_*/dz)(δ0 | σ²_shell, z) on a uniform δ0 grid (then divided by its box mean).
  void conditional_table(double z, double s_shell, double d_lo, double d_hi, std::vector<float>& g) const {
    const std::size_t n = g.size();
    const double h = 0.005 * (1.0 + z);
    auto stars = [&](double d0, double zz) {
      const double sm = smin(zz);
      if (!(sm > s_shell)) return 0.0;
      const double u = (delta_collapse / growth(zz) - d0) / std::sqrt(2.0 * (sm - s_shell));
      return ionizing_yield(star_, mv_, std::max(u, 0.0), s_shell, sm);
    };
    const double dgr = growth(z);
    for (std::size_t j = 0; j < n; ++j) {
      const double d0 = d_lo + (d_hi - d_lo) * static_cast<double>(j) / static_cast<double>(n - 1);
      const double rate = std::max(0.0, (stars(d0, z - h) - stars(d0, z + h)) / (2 * h));
      g[j] = static_cast<float>(std::max(0.0, 1.0 + dgr * d0) * rate);
    }
  }

 private:
  static MassVariance make_mv(const ConeSettings& s, const cosmo::Cosmology& c, double z_hi) {
    const double m_lo = 0.5 * min_halo_mass(s.min_virial_temperature_K, z_hi + 0.5, c);
    return MassVariance(c, std::min(m_lo, 1e6), 1e16, 600);
  }
  const cosmo::Cosmology& c_;
  const ConeSettings& s_;
  double z0_, dz_ = 1;
  MassVariance mv_;
  Efficiency star_;
  std::vector<double> growth_, smin_, dist_, q_, psi_;
};

/// σ_HI + (n_He/n_H) σ_HeI and the deposited-energy weight, tabulated in ln E.
class CrossSections {
 public:
  CrossSections() {
    lo_ = std::log(0.01);
    const double hi = std::log(300.0);
    const std::size_t n = 8192;
    dl_ = (hi - lo_) / static_cast<double>(n - 1);
    sigma_.resize(n);
    for (std::size_t i = 0; i < n; ++i) {
      const double e = std::exp(lo_ + dl_ * static_cast<double>(i));
      sigma_[i] = sigma_hi_cm2(e) + helium_per_hydrogen * sigma_hei_cm2(e);
    }
  }
  double sigma(double e_keV) const { return lerp_table(sigma_, lo_, 1.0 / dl_, std::log(e_keV)); }

 private:
  double lo_, dl_;
  std::vector<double> sigma_;
};

struct Weights {
  std::vector<double> alpha, energy, count;  // per shell, then the far region last
  std::vector<double> z_mid;                 // retarded redshift of each shell's mid radius
  bool any = false;
};

/// The per-node scalars of every shell and of the far region (beyond the last shell).
class Radiation {
 public:
  Radiation(const ConeSettings& s, const cosmo::Cosmology& c, const SourceHistory& src, std::vector<double> radii)
      : s_(s), src_(src), radii_(std::move(radii)) {
    const auto& p = c.parameters();
    const double rho_crit = 1.87847e-29 * p.h * p.h;  // g cm⁻³ (common practice)
    n_h0_ = hydrogen_mass_fraction * p.omega_b * rho_crit / proton_g;
    const double alpha = s.spin.xray_spectral_index, e0 = s.spin.xray_threshold_energy_keV;
    const double band = std::abs(alpha - 1.0) < 1e-9 ? std::log(xray_band_top_keV / e0)
                                                     : (std::pow(xray_band_top_keV, 1 - alpha) - std::pow(e0, 1 - alpha)) / (1 - alpha);
    xray_norm_ = s.spin.xray_luminosity_erg_s_per_msun_yr / band;  // L_E = norm E^−α, erg/s/keV per Msun/yr
    const double nu_a = lyman_frequency_Hz(2), a = lyman_spectral_index;
    lyman_norm_ = s.spin.lyman_photons_per_stellar_baryon * a / (std::pow(nu_lyman_limit_Hz, a) - std::pow(nu_a, a));
  }
  double hydrogen_today_cm3() const { return n_h0_; }

  Weights at(double z) const {
    const std::size_t ns = radii_.size();
    Weights w;
    w.alpha.assign(ns + 1, 0.0);
    w.energy.assign(ns + 1, 0.0);
    w.count.assign(ns + 1, 0.0);
    w.z_mid.assign(ns + 1, z);
    const double d0 = src_.distance(z);
    const double r_far = src_.distance(s_.spin.start_redshift) - d0;
    if (!(r_far > 0)) return w;
    std::vector<double> edge(ns + 2, 0.0);
    for (std::size_t i = 0; i < ns; ++i) edge[i + 1] = radii_[i];
    edge[ns + 1] = std::max(r_far, radii_.back());
    for (std::size_t b = 0; b <= ns; ++b) {
      const double lo = edge[b], hi = edge[b + 1];
      const double mid = std::cbrt(0.5 * (lo * lo * lo + hi * hi * hi));
      w.z_mid[b] = src_.redshift_at(d0 + std::min(mid, r_far));
    }
    lyman(z, d0, r_far, edge, w);
    xrays(z, d0, r_far, edge, w);
    for (std::size_t b = 0; b <= ns; ++b) w.any = w.any || w.alpha[b] > 0 || w.energy[b] > 0 || w.count[b] > 0;
    return w;
  }

 private:
  double emissivity_baryons(double z) const {  // stellar baryons formed per s per comoving cm³
    return src_.psi(z) * msun_g / proton_g / (year_s * mpc_cm * mpc_cm * mpc_cm);
  }

  void lyman(double z, double d0, double r_far, const std::vector<double>& edge, Weights& w) const {
    if (!(s_.spin.lyman_photons_per_stellar_baryon > 0)) return;
    const auto& g = gauss16();
    const double pref = (1 + z) * (1 + z) / (4 * std::numbers::pi) * mpc_cm;
    const double a = lyman_spectral_index;
    for (int n = 2; n <= lyman_n_max; ++n) {
      const double f = lyman_recycling_fraction(n);
      if (f <= 0) continue;
      const double nu_n = lyman_frequency_Hz(n);
      // Photons reaching Ly-n at z were emitted below Ly-(n+1): horizon 1+z_max = (1+z) ν_{n+1}/ν_n.
      const double z_max = (1 + z) * lyman_frequency_Hz(n + 1) / nu_n - 1;
      const double r_n = std::min(src_.distance(std::min(z_max, src_.z_top())) - d0, r_far);
      for (std::size_t b = 0; b + 1 < edge.size(); ++b) {
        const double lo = edge[b], hi = std::min(edge[b + 1], r_n);
        if (!(hi > lo)) continue;
        double sum = 0;
        for (std::size_t q = 0; q < g.x.size(); ++q) {
          const double r = lo + 0.5 * (hi - lo) * (g.x[q] + 1);
          const double zr = src_.redshift_at(d0 + r);
          const double nu_e = nu_n * (1 + zr) / (1 + z);
          sum += g.w[q] * emissivity_baryons(zr) * lyman_norm_ * std::pow(nu_e, a - 1);
        }
        w.alpha[b] += pref * f * sum * 0.5 * (hi - lo);
      }
    }
  }

  void xrays(double z, double d0, double r_far, const std::vector<double>& edge, Weights& w) const {
    if (!(s_.spin.xray_luminosity_erg_s_per_msun_yr > 0)) return;
    const double e0 = s_.spin.xray_threshold_energy_keV, alpha = s_.spin.xray_spectral_index;
    // Observed energies: from the softest photon that can arrive from the start redshift to 10 keV.
    const std::size_t ne = 160;
    const double le0 = std::log(e0 * (1 + z) / (1 + s_.spin.start_redshift)), le1 = std::log(xray_top_keV);
    const double dle = (le1 - le0) / static_cast<double>(ne - 1);
    std::vector<double> e(ne), de(ne), sig(ne), heat(ne), tau(ne, 0.0);
    for (std::size_t j = 0; j < ne; ++j) {
      e[j] = std::exp(le0 + dle * static_cast<double>(j));
      de[j] = e[j] * dle * (j == 0 || j + 1 == ne ? 0.5 : 1.0);  // trapezoid in ln E
      sig[j] = xs_.sigma(e[j]);
      heat[j] = (sigma_hi_cm2(e[j]) * (e[j] - e_hi_keV) + helium_per_hydrogen * sigma_hei_cm2(e[j]) * (e[j] - e_hei_keV)) * kev_erg;
    }
    // r nodes: Simpson in r within each shell, in ln r across the far region.
    const double pref = (1 + z) * (1 + z) / (mpc_cm * mpc_cm * mpc_cm);  // ψ per Mpc³ → per cm³
    double r_prev = 0, z_prev = z;
    for (std::size_t b = 0; b + 1 < edge.size(); ++b) {
      const double lo = edge[b], hi = std::min(edge[b + 1], r_far);
      if (!(hi > lo)) break;
      const bool far = b + 1 == edge.size() - 1;
      const std::size_t m = far ? 192 : 16;  // even
      const bool logr = far && lo > 0;
      for (std::size_t q = 0; q <= m; ++q) {
        const double t = static_cast<double>(q) / static_cast<double>(m);
        const double r = logr ? lo * std::pow(hi / lo, t) : lo + (hi - lo) * t;
        const double jac = logr ? r * std::log(hi / lo) : (hi - lo);
        const double simpson = (q == 0 || q == m ? 1.0 : (q % 2 == 1 ? 4.0 : 2.0)) / (3.0 * static_cast<double>(m));
        const double zr = src_.redshift_at(d0 + r);
        // Optical depth from the cell out to r (trapezoid between successive nodes, mean neutral IGM).
        if (r > r_prev) {
          const double zm = 0.5 * (zr + z_prev), a1 = 1 + zm;
          const double col = n_h0_ * src_.neutral(zm) * a1 * a1 * (r - r_prev) * mpc_cm;
          const double stretch = (1 + zm) / (1 + z);
          for (std::size_t j = 0; j < ne; ++j) tau[j] += col * xs_.sigma(e[j] * stretch);
          r_prev = r;
          z_prev = zr;
        }
        const double em = src_.psi(zr) * pref * jac * simpson * mpc_cm;  // dr in cm
        if (!(em > 0)) continue;
        const double stretch = (1 + zr) / (1 + z);
        double sum_e = 0, sum_n = 0;
        for (std::size_t j = 0; j < ne; ++j) {
          const double ee = e[j] * stretch;
          if (ee < e0 || ee > xray_top_keV || tau[j] > 60) continue;
          const double photons = xray_norm_ * std::pow(ee, -alpha) / (ee * kev_erg) * std::exp(-tau[j]) * de[j];
          sum_e += photons * heat[j];
          sum_n += photons * sig[j];
        }
        w.energy[b] += em * sum_e;
        w.count[b] += em * sum_n;
      }
    }
  }

  const ConeSettings& s_;
  const SourceHistory& src_;
  std::vector<double> radii_;
  CrossSections xs_;
  double n_h0_ = 0, xray_norm_ = 0, lyman_norm_ = 0;
};

/// Shull & van Steenberg (1985) fractions tabulated in y = x_e^{1/4} (the fits are smooth in y;
/// 4096 nodes, linear interpolation: relative error < 1e-5 above x_e = 1e-8), so that the per-cell
/// integration needs no pow().
class EnergyFractions {
 public:
  EnergyFractions() {
    for (std::size_t i = 0; i < n; ++i) {
      const double y = static_cast<double>(i) / static_cast<double>(n - 1), x = y * y * y * y;
      heat_[i] = heat_fraction(x);
      ion_[i] = ionization_fraction(x);
    }
  }
  void at(double x_e, double& f_heat, double& f_ion) const {
    const double t = std::sqrt(std::sqrt(std::clamp(x_e, 0.0, 1.0))) * static_cast<double>(n - 1);
    const auto i = std::min(static_cast<std::size_t>(t), n - 2);
    const double w = t - static_cast<double>(i);
    f_heat = heat_[i] + w * (heat_[i + 1] - heat_[i]);
    f_ion = ion_[i] + w * (ion_[i + 1] - ion_[i]);
  }

 private:
  static constexpr std::size_t n = 4096;
  std::array<double, n> heat_{}, ion_{};
};
const EnergyFractions& energy_fractions() {
  static const EnergyFractions f;
  return f;
}

/// The case-B coefficient tabulated in s = T^{1/4} over 1 K … 10⁵ K (4096 nodes, linear: relative
/// error < 1e-4; clamped outside), so that the per-cell integration needs no pow().
class Recombination {
 public:
  Recombination() {
    for (std::size_t i = 0; i < n; ++i) table_[i] = recombination_case_b(std::pow(s0 + ds * static_cast<double>(i), 4.0));
  }
  double operator()(double T) const {
    const double t = (std::sqrt(std::sqrt(std::clamp(T, 1.0, 1e5))) - s0) / ds;
    const auto i = std::min(static_cast<std::size_t>(t), n - 2);
    const double w = t - static_cast<double>(i);
    return table_[i] + w * (table_[i + 1] - table_[i]);
  }

 private:
  static constexpr std::size_t n = 4096;
  static constexpr double s0 = 1.0, ds = (17.782794100389228 - 1.0) / static_cast<double>(n - 1);  // 1e5^{1/4}
  std::array<double, n> table_{};
};
const Recombination& recombination() {
  static const Recombination r;
  return r;
}

/// Per-node scalars of the thermal equations.
struct NodeState {
  double z, dt_dz, t_cmb, compton, growth, dgrowth_dz, n_h;  // n_h: mean hydrogen density, cm⁻³
};

NodeState node_state(double z, const cosmo::Cosmology& c, const SourceHistory& src, double n_h0) {
  NodeState n{};
  n.z = z;
  n.dt_dz = -1.0 / (src.hubble_per_s(z) * (1 + z));
  n.t_cmb = c.parameters().T_cmb_K * (1 + z);
  n.compton = compton_rate_per_s(n.t_cmb);
  n.growth = c.growth_factor(z);
  n.dgrowth_dz = -c.growth_rate(z) * n.growth / (1 + z);
  n.n_h = n_h0 * (1 + z) * (1 + z) * (1 + z);
  return n;
}

/// d(T_K, x_e)/dz of a cell of z = 0 overdensity δ0 with deposited energy A_E (erg/s per H atom,
/// before the neutral fraction) and primary ionizations A_N (per s per H atom).
struct Rates {
  double dT, dx;
};
/// alpha_b: the case-B coefficient at the step's starting temperature (recombinations of the
/// 10⁻⁴–10⁻² residual and X-ray electrons are a small term; one pow() per cell and step).
inline Rates rates(const NodeState& n, double T, double x, double a_e, double a_n, double delta0, double alpha_b) {
  const double one_plus = std::max(1.0 + n.growth * delta0, 0.05);
  const double particles = 1.0 + helium_per_hydrogen + x;
  double f_heat = 0, f_ion = 0;
  energy_fractions().at(x, f_heat, f_ion);
  const double heat = 2.0 / (3.0 * k_boltzmann * particles) * f_heat * (1.0 - x) * a_e;
  const double compton = n.compton * x / particles * (n.t_cmb - T);
  const double dT = 2.0 * T / (1.0 + n.z) + 2.0 / 3.0 * T * n.dgrowth_dz * delta0 / one_plus + (heat + compton) * n.dt_dz;
  const double ion = (1.0 - x) * (a_n + f_ion * a_e / (e_hi_keV * kev_erg)) - alpha_b * n.n_h * one_plus * x * x;
  return {dT, ion * n.dt_dz};
}

/// Heun's step from node a to node b (sources linear in z between them).
inline void heun(const NodeState& a, const NodeState& b, double& T, double& x, double ae_a, double an_a, double ae_b,
                 double an_b, double delta0) {
  const double dz = b.z - a.z;
  const double alpha_b = recombination()(T);
  const Rates ra = rates(a, T, x, ae_a, an_a, delta0, alpha_b);
  const double Tp = std::max(T + dz * ra.dT, 0.1), xp = std::clamp(x + dz * ra.dx, 0.0, 1.0);
  const Rates rb = rates(b, Tp, xp, ae_b, an_b, delta0, alpha_b);
  T = std::max(T + 0.5 * dz * (ra.dT + rb.dT), 0.1);
  x = std::clamp(x + 0.5 * dz * (ra.dx + rb.dx), 0.0, 1.0);
}

/// Variance of δ0 averaged over a shell r_lo..r_hi (the annulus window), from the linear P(k).
double shell_variance(const cosmo::Cosmology& c, double r_lo, double r_hi) {
  const std::size_t n = 4000;
  const double lk0 = std::log(1e-4), lk1 = std::log(50.0 / r_hi + 10.0), dlk = (lk1 - lk0) / static_cast<double>(n - 1);
  const double v_lo = r_lo * r_lo * r_lo, v_hi = r_hi * r_hi * r_hi;
  double sum = 0;
  for (std::size_t i = 0; i < n; ++i) {
    const double k = std::exp(lk0 + dlk * static_cast<double>(i));
    auto th = [](double x) { return top_hat(x, std::sin(x), std::cos(x)); };
    const double w = (v_hi * th(k * r_hi) - (r_lo > 0 ? v_lo * th(k * r_lo) : 0.0)) / (v_hi - v_lo);
    sum += (i == 0 || i + 1 == n ? 0.5 : 1.0) * k * k * k * c.linear_power(k, 0.0) * w * w;
  }
  return sum * dlk / (2 * std::numbers::pi * std::numbers::pi);
}

/// g(δ) from its uniform table (clamped), the shell's emissivity pattern.
[[gnu::always_inline]] inline float table_g(float v, const float* __restrict table, float dlo, float scale, float top,
                                            int n_table) {
  float x = (v - dlo) * scale;
  x = x > 0.0f ? x : 0.0f;
  x = x < top ? x : top;
  int j = static_cast<int>(x);
  j = j < n_table - 2 ? j : n_table - 2;
  const float f = x - static_cast<float>(j);
  return table[j] + f * (table[j + 1] - table[j]);
}

/// e += g(δ) w_e, n += g(δ) w_n over a run of cells (branch-free so that it vectorizes, with AVX2
/// gathers where the CPU has them; no FMA in the clones, so every clone gives the same bits).
__attribute__((target_clones("avx2", "default"))) void accumulate_shell(
    const float* __restrict d, float* __restrict e, float* __restrict n, std::size_t count,
    const float* __restrict table, float dlo, float scale, float top, int n_table, float we, float wn) {
  for (std::size_t k = 0; k < count; ++k) {
    const float g = table_g(d[k], table, dlo, scale, top, n_table);
    e[k] += g * we;
    n[k] += g * wn;
  }
}

std::size_t first_at_or_above(const std::vector<double>& z_los, double z) {
  return static_cast<std::size_t>(std::lower_bound(z_los.begin(), z_los.end(), z) - z_los.begin());
}

}  // namespace

std::vector<double> dawn_redshift_nodes(const ConeSettings& s, double z_low) {
  const double span = std::log((1 + s.spin.start_redshift) / (1 + z_low));
  const auto n = static_cast<std::size_t>(std::max(1.0, std::ceil(span / s.spin.max_step_dlog1pz - 1e-9)));
  std::vector<double> z(n + 1);
  for (std::size_t i = 0; i <= n; ++i)
    z[i] = (1 + s.spin.start_redshift) * std::exp(-span * static_cast<double>(i) / static_cast<double>(n)) - 1;
  z[n] = z_low;
  return z;
}

std::vector<double> dawn_shell_radii(const ConeSettings& s) {
  const double r0 = s.cell_mpc * std::cbrt(3.0 / (4.0 * std::numbers::pi));
  const double r1 = std::max(0.5 * static_cast<double>(s.n_perp) * s.cell_mpc, 2.0 * r0);
  std::vector<double> r(s.spin.n_shells);
  for (std::size_t i = 0; i < r.size(); ++i)
    r[i] = r0 * std::pow(r1 / r0, static_cast<double>(i) / static_cast<double>(r.size() - 1));
  return r;
}

DawnCells dawn_cells(const ConeSettings& s, const cosmo::Cosmology& c, const std::vector<double>& z_los,
                     const fft::SlabField& lin, fft::SlabField& work, const ModeBins& bins, MPI_Comm group) {
  const std::size_t n0 = lin.local_n0(), np = s.n_perp, nl = s.n_los, rows = n0 * np, pad = work.padded_n2();
  const std::size_t cells = rows * nl;
  const std::vector<double> zn = dawn_redshift_nodes(s, z_los.front() - 1e-6);
  const std::vector<double> radii = dawn_shell_radii(s);
  const SourceHistory src(s, c, zn.back(), s.spin.start_redshift);
  const Radiation rad(s, c, src, radii);
  const double n_h0 = rad.hydrogen_today_cm3();

  DawnCells out;
  out.gas_K = core::Array3<float>(n0, np, nl);
  out.x_e = core::Array3<float>(n0, np, nl, static_cast<float>(start_x_e));
  out.lyman_alpha = core::Array3<float>(n0, np, nl, 0.0f);
  out.density = core::Array3<float>(n0, np, nl);  // δ0 on the cell-volume sphere, then δ at z_k
  std::vector<float> ae_prev(cells, 0.0f), an_prev(cells, 0.0f), ae(cells), an(cells);
  float* T = out.gas_K.data.data();
  float* X = out.x_e.data.data();
  float* J = out.lyman_alpha.data.data();
  float* D0 = out.density.data.data();

  // Shell fields: δ0 averaged over shell i (annulus window); shell 0 (one cell's volume) is kept
  // as the cells' own density, the others are made again at every node (memory stays flat).
  std::vector<double> variance(radii.size());
  std::vector<float> gains(ModeBins::n_bins), one(ModeBins::n_bins), other(ModeBins::n_bins);
  auto shell_field = [&](std::size_t i) {
    const double hi = radii[i], lo = i == 0 ? 0.0 : radii[i - 1];
    bins.window(hi, one);
    const double v_hi = hi * hi * hi, v_lo = lo * lo * lo;
    if (i == 0) {
      gains = one;
    } else {
      bins.window(lo, other);
      for (std::size_t b = 0; b < gains.size(); ++b)
        gains[b] = static_cast<float>((v_hi * one[b] - v_lo * other[b]) / (v_hi - v_lo));
    }
    fft::SlabField* dst = &work;
    bins.smooth_m<1>(lin, &dst, gains.data());
    work.inverse();
    ++out.transforms;
  };
  for (std::size_t i = 0; i < radii.size(); ++i) variance[i] = shell_variance(c, i == 0 ? 0.0 : radii[i - 1], radii[i]);
  if (s.uniform_density) {
    std::fill(D0, D0 + cells, 0.0f);
  } else {
    shell_field(0);
    for (std::size_t r = 0; r < rows; ++r) std::copy_n(work.real_data() + r * pad, nl, D0 + r * nl);
  }

  // Initial state at the start redshift: adiabatic cooling since decoupling, compressed as (1+δ)^{2/3}.
  NodeState prev = node_state(zn[0], c, src, n_h0);
  const double t_start = c.parameters().T_cmb_K * (1 + decoupling_redshift) *
                         std::pow((1 + zn[0]) / (1 + decoupling_redshift), 2.0);
  for (std::size_t q = 0; q < cells; ++q)
    T[q] = static_cast<float>(t_start * std::pow(std::max(1.0 + prev.growth * D0[q], 0.05), 2.0 / 3.0));

  const std::size_t n_table = s.model == SourceModel::mass_dependent ? 256 : 1024;
  std::vector<float> gtab(n_table), w_alpha(nl, 0.0f);
  for (std::size_t n = 1; n < zn.size(); ++n) {
    const NodeState node = node_state(zn[n], c, src, n_h0);
    const Weights w = rad.at(zn[n]);
    const std::size_t k_end = first_at_or_above(z_los, zn[n - 1]);  // cells still integrating
    const std::size_t k_fin = first_at_or_above(z_los, zn[n]);      // … of which these end here
    // Node n's share of J_α for each LOS cell (linear in z between the nodes around it).
    const double z_next = n + 1 < zn.size() ? zn[n + 1] : zn[n];
    const std::size_t k_lo = first_at_or_above(z_los, z_next);
    std::fill(w_alpha.begin(), w_alpha.end(), 0.0f);
    for (std::size_t k = k_lo; k < k_end; ++k)
      w_alpha[k] = static_cast<float>(z_los[k] >= zn[n] ? (zn[n - 1] - z_los[k]) / (zn[n - 1] - zn[n])
                                                        : (z_los[k] - z_next) / (zn[n] - z_next));
    const std::size_t ns = radii.size();
    for (std::size_t r = 0; r < rows; ++r) {
      std::fill_n(&ae[r * nl], k_end, in_unit(w.energy[ns], energy_unit));
      std::fill_n(&an[r * nl], k_end, in_unit(w.count[ns], count_unit));
      for (std::size_t k = k_lo; k < k_end; ++k) J[r * nl + k] += in_unit(w.alpha[ns], alpha_unit) * w_alpha[k];
    }
    for (std::size_t i = 0; i < ns && w.any && k_end > 0; ++i) {
      if (!(w.alpha[i] > 0 || w.energy[i] > 0 || w.count[i] > 0)) continue;
      const float* d = D0;
      std::size_t stride = nl;
      if (i > 0 && !s.uniform_density) {
        shell_field(i);
        d = work.real_data();
        stride = pad;
      }
      const double sd = std::sqrt(variance[i]);
      const double d_lo = -8 * sd, d_hi = 8 * sd;
      src.conditional_table(w.z_mid[i], variance[i], d_lo, d_hi, gtab);
      const auto scale = static_cast<float>(static_cast<double>(n_table - 1) / (d_hi - d_lo));
      const auto dlo = static_cast<float>(d_lo);
      const float top = static_cast<float>(n_table - 1);
      auto g_of = [&](float v) {
        const float x = std::clamp((v - dlo) * scale, 0.0f, top);
        const auto j = std::min(static_cast<std::size_t>(x), n_table - 2);
        const float f = x - static_cast<float>(j);
        return gtab[j] + f * (gtab[j + 1] - gtab[j]);
      };
      // The box mean of g over the cells still integrating (so that the shells' mean emissivity is
      // ψ̄), from every 4th row by global row index: the same sample on any slab decomposition.
      double sums[2] = {0, 0};
      for (std::size_t r = 0; r < rows; ++r) {
        if ((lin.local_start0() * np + r) % 4 != 0) continue;
        double row_sum = 0;
        for (std::size_t k = 0; k < k_end; ++k) row_sum += g_of(d[r * stride + k]);
        sums[0] += row_sum;
        sums[1] += static_cast<double>(k_end);
      }
      SPINFLIP_CHECK_MPI(MPI_Allreduce(MPI_IN_PLACE, sums, 2, MPI_DOUBLE, MPI_SUM, group));
      const double mean = sums[1] > 0 ? sums[0] / sums[1] : 0.0;
      const bool uniform = !(mean > 1e-300);
      const auto inv_mean = static_cast<float>(uniform ? 0.0 : 1.0 / mean);
      const float we = in_unit(w.energy[i], energy_unit), wn = in_unit(w.count[i], count_unit),
                  wa = in_unit(w.alpha[i], alpha_unit);
      // g/⟨g⟩ folded into the table, so that the pass is one lookup and two multiply-adds per cell.
      if (uniform) std::fill(gtab.begin(), gtab.end(), 1.0f);
      else
        for (float& v : gtab) v *= inv_mean;
      for (std::size_t r = 0; r < rows; ++r) {
        const float* d_row = d + r * stride;
        accumulate_shell(d_row, &ae[r * nl], &an[r * nl], k_end, gtab.data(), dlo, scale, top,
                         static_cast<int>(n_table), we, wn);
        float* j_row = &J[r * nl];
        for (std::size_t k = k_lo; k < k_end; ++k) j_row[k] += g_of(d_row[k]) * wa * w_alpha[k];
      }
    }
    // T_K and x_e from node n−1 to node n; the cells whose redshift lies between take the
    // linear interpolation and are left alone from now on.
    for (std::size_t r = 0; r < rows; ++r)
      for (std::size_t k = 0; k < k_end; ++k) {
        const std::size_t q = r * nl + k;
        double t = T[q], x = X[q];
        const double t_old = t, x_old = x;
        heun(prev, node, t, x, ae_prev[q] * energy_unit, an_prev[q] * count_unit, ae[q] * energy_unit,
             an[q] * count_unit, D0[q]);
        if (k >= k_fin) {
          const double f = (prev.z - z_los[k]) / (prev.z - node.z);
          t = t_old + f * (t - t_old);
          x = x_old + f * (x - x_old);
        }
        T[q] = static_cast<float>(t);
        X[q] = static_cast<float>(x);
      }
    std::swap(ae, ae_prev);
    std::swap(an, an_prev);
    prev = node;
  }
  std::vector<float> growth_los(nl);
  for (std::size_t k = 0; k < nl; ++k) growth_los[k] = static_cast<float>(c.growth_factor(z_los[k]));
  for (std::size_t r = 0; r < rows; ++r)
    for (std::size_t k = 0; k < nl; ++k) {
      D0[r * nl + k] *= growth_los[k];
      J[r * nl + k] = static_cast<float>(J[r * nl + k] * alpha_unit);
    }
  return out;
}

MeanFieldHistory mean_field_history(const ConeSettings& s, const cosmo::Cosmology& c, const std::vector<double>& z_out) {
  if (z_out.empty()) return {};
  const double z_low = *std::min_element(z_out.begin(), z_out.end());
  const std::vector<double> zn = dawn_redshift_nodes(s, z_low - 1e-6);
  const SourceHistory src(s, c, zn.back(), s.spin.start_redshift);
  const Radiation rad(s, c, src, dawn_shell_radii(s));
  const double n_h0 = rad.hydrogen_today_cm3();
  auto total = [](const std::vector<double>& v) {
    double t = 0;
    for (double x : v) t += x;
    return t;
  };
  std::vector<double> T(zn.size()), X(zn.size()), A(zn.size());
  NodeState prev = node_state(zn[0], c, src, n_h0);
  T[0] = c.parameters().T_cmb_K * (1 + decoupling_redshift) * std::pow((1 + zn[0]) / (1 + decoupling_redshift), 2.0);
  X[0] = start_x_e;
  double ae_prev = 0, an_prev = 0;
  for (std::size_t n = 1; n < zn.size(); ++n) {
    const NodeState node = node_state(zn[n], c, src, n_h0);
    const Weights w = rad.at(zn[n]);
    const double ae = total(w.energy), an = total(w.count);
    A[n] = total(w.alpha);
    double t = T[n - 1], x = X[n - 1];
    heun(prev, node, t, x, ae_prev, an_prev, ae, an, 0.0);
    T[n] = t;
    X[n] = x;
    ae_prev = ae;
    an_prev = an;
    prev = node;
  }
  MeanFieldHistory h;
  for (double z : z_out) {
    if (z >= zn[0]) {
      h.z.push_back(z);
      h.gas_K.push_back(T[0]);
      h.x_e.push_back(X[0]);
      h.lyman_alpha.push_back(A[0]);
      continue;
    }
    std::size_t n = 1;
    while (n + 1 < zn.size() && zn[n] > z) ++n;
    const double f = (zn[n - 1] - z) / (zn[n - 1] - zn[n]);
    h.z.push_back(z);
    h.gas_K.push_back(T[n - 1] + f * (T[n] - T[n - 1]));
    h.x_e.push_back(X[n - 1] + f * (X[n] - X[n - 1]));
    h.lyman_alpha.push_back(A[n - 1] + f * (A[n] - A[n - 1]));
  }
  return h;
}

CellSpin cell_spin(double z, double gas_K, double x_e, double lyman_alpha, double one_plus_delta,
                   const cosmo::Cosmology& c) {
  const auto& p = c.parameters();
  const double t_cmb = p.T_cmb_K * (1 + z);
  const double n_h0 = hydrogen_mass_fraction * p.omega_b * 1.87847e-29 * p.h * p.h / proton_g;
  const double opd = std::max(one_plus_delta, 0.0);
  const double n_h = n_h0 * (1 + z) * (1 + z) * (1 + z) * opd;
  const double x_c = collisional_coupling(gas_K, t_cmb, n_h, x_e);
  const double x_tilde = x_alpha_per_intensity(t_cmb) * lyman_alpha;
  const SpinState st = spin_temperature(gas_K, t_cmb, x_tilde, x_c, gunn_peterson_depth(z, (1 - x_e) * opd));
  return {st.T_s_K, st.x_alpha};
}

double mean_sfrd_msun_yr_mpc3(const ConeSettings& s, const cosmo::Cosmology& c, double z) {
  const SourceHistory src(s, c, std::max(z - 1, 0.0), z + 1);
  return src.psi(z);
}

}  // namespace spinflip::sim::detail
