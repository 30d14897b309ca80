#include "sim/excursion_set.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <numbers>

#include "core/errors.hpp"
#include "cosmo/cosmology.hpp"

namespace spinflip::sim::detail {
namespace {

constexpr std::size_t n_gauss = 48;

// Gauss–Legendre nodes/weights on [-1, 1] (Newton on P_n; common practice).
struct GaussLegendre {
  std::array<double, n_gauss> x{}, w{};
  GaussLegendre() {
    const std::size_t n = n_gauss;
    for (std::size_t i = 0; i < (n + 1) / 2; ++i) {
      double z = std::cos(std::numbers::pi * (static_cast<double>(i) + 0.75) / (static_cast<double>(n) + 0.5));
      double dp = 1.0;
      for (int it = 0; it < 100; ++it) {
        double p1 = 1.0, p2 = 0.0;
        for (std::size_t j = 1; j <= n; ++j) {
          double p3 = p2;
          p2 = p1;
          p1 = ((2.0 * static_cast<double>(j) - 1.0) * z * p2 - (static_cast<double>(j) - 1.0) * p3) /
               static_cast<double>(j);
        }
        dp = static_cast<double>(n) * (z * p1 - p2) / (z * z - 1.0);
        double dz = p1 / dp;
        z -= dz;
        if (std::abs(dz) < 1e-15) break;
      }
      x[i] = -z;
      x[n - 1 - i] = z;
      w[i] = w[n - 1 - i] = 2.0 / ((1.0 - z * z) * dp * dp);
    }
  }
};
const GaussLegendre& gauss() {
  static const GaussLegendre g;
  return g;
}

}  // namespace

MassVariance::MassVariance(const cosmo::Cosmology& c, double m_lo_msun, double m_hi_msun, std::size_t nodes)
    : m_lo_(m_lo_msun), m_hi_(m_hi_msun) {
  if (!(m_lo_msun > 0) || !(m_hi_msun > m_lo_msun) || nodes < 4)
    throw InternalError("MassVariance: bad mass range");
  lnm0_ = std::log(m_lo_msun);
  dlnm_ = (std::log(m_hi_msun) - lnm0_) / static_cast<double>(nodes - 1);
  s_.resize(nodes);
  for (std::size_t i = 0; i < nodes; ++i) {
    double sig = c.sigma_M(std::exp(lnm0_ + dlnm_ * static_cast<double>(i)), 0.0);
    s_[i] = std::log(sig * sig);  // stored as ln σ²
  }
  for (std::size_t i = 1; i < nodes; ++i)
    if (!(s_[i] < s_[i - 1])) throw InternalError("MassVariance: σ(M) is not decreasing");
  // Inverse on a uniform ln σ² grid, by walking the forward table.
  const std::size_t ni = 4 * nodes;
  lns0_ = s_.back();
  dlns_ = (s_.front() - lns0_) / static_cast<double>(ni - 1);
  lnm_of_lns_.resize(ni);
  std::size_t j = nodes - 1;  // s_ decreasing: walk from the high-mass end
  for (std::size_t i = 0; i < ni; ++i) {
    double ls = std::min(lns0_ + dlns_ * static_cast<double>(i), s_.front());
    while (j > 0 && s_[j - 1] < ls) --j;
    // ls in [s_[j], s_[j-1]]
    if (j == 0) {
      lnm_of_lns_[i] = lnm0_;
      continue;
    }
    double t = (ls - s_[j]) / (s_[j - 1] - s_[j]);
    lnm_of_lns_[i] = lnm0_ + dlnm_ * (static_cast<double>(j) - t);
  }
}

double MassVariance::sigma2(double m_msun) const {
  double x = (std::log(m_msun) - lnm0_) / dlnm_;
  x = std::clamp(x, 0.0, static_cast<double>(s_.size() - 1));
  auto i = std::min(static_cast<std::size_t>(x), s_.size() - 2);
  double t = x - static_cast<double>(i);
  return std::exp(s_[i] * (1 - t) + s_[i + 1] * t);
}

double MassVariance::mass_of_sigma2(double s) const {
  double x = (std::log(s) - lns0_) / dlns_;
  x = std::clamp(x, 0.0, static_cast<double>(lnm_of_lns_.size() - 1));
  auto i = std::min(static_cast<std::size_t>(x), lnm_of_lns_.size() - 2);
  double t = x - static_cast<double>(i);
  return std::exp(lnm_of_lns_[i] * (1 - t) + lnm_of_lns_[i + 1] * t);
}

double Efficiency::operator()(double m) const {
  if (!mass_dependent) return zeta;
  double x = m / 1e10;
  double fstar = std::min(1.0, fstar10 * std::pow(x, alpha_star));
  double fesc = std::min(1.0, fesc10 * std::pow(x, alpha_esc));
  return photons_per_baryon * fstar * fesc * std::exp(-m_turn_msun / m);
}

double ionizing_yield(const Efficiency& e, const MassVariance& mv, double u_min, double s_R, double s_min) {
  if (!(s_min > s_R)) return 0.0;  // the region is smaller than the smallest source halo
  u_min = std::max(u_min, 0.0);
  if (!e.mass_dependent) return e.zeta * std::erfc(u_min);
  // The Gaussian weight e^{-u²} has fallen by e^{-8} or more beyond L.
  const double L = 8.0 / (1.0 + u_min);
  const auto& g = gauss();
  double sum = 0.0;
  const double u2min = u_min * u_min;
  for (std::size_t i = 0; i < n_gauss; ++i) {
    double u = u_min + 0.5 * L * (g.x[i] + 1.0);
    double s = s_R + (s_min - s_R) * (u2min / (u * u));
    double m = mv.mass_of_sigma2(s);
    sum += g.w[i] * e(m) * std::exp(-u * u);
  }
  return sum * 0.5 * L * 2.0 / std::sqrt(std::numbers::pi);
}

double collapsed_fraction(double delta_R0, double growth, double s_R, double s_min) {
  if (!(s_min > s_R)) return 0.0;
  double b = delta_collapse / growth - delta_R0;
  if (b <= 0) return 1.0;
  return std::erfc(b / std::sqrt(2.0 * (s_min - s_R)));
}

double erfc_inverse(double y) {
  if (!(y > 0 && y < 2)) throw InternalError("erfc_inverse: argument outside (0, 2)");
  double lo = -10, hi = 10;  // erfc falls with x
  for (int it = 0; it < 200 && hi - lo > 1e-15; ++it) {
    double mid = 0.5 * (lo + hi);
    (std::erfc(mid) > y ? lo : hi) = mid;
  }
  return 0.5 * (lo + hi);
}

double critical_u(const Efficiency& e, const MassVariance& mv, double s_R, double s_min) {
  if (!(s_min > s_R)) return -1.0;
  if (!e.mass_dependent) return e.zeta > 1.0 ? erfc_inverse(1.0 / e.zeta) : -1.0;
  if (ionizing_yield(e, mv, 0.0, s_R, s_min) < 1.0) return -1.0;
  double lo = 0.0, hi = 12.0;
  if (ionizing_yield(e, mv, hi, s_R, s_min) >= 1.0) return hi;
  for (int it = 0; it < 40; ++it) {
    double mid = 0.5 * (lo + hi);
    (ionizing_yield(e, mv, mid, s_R, s_min) >= 1.0 ? lo : hi) = mid;
  }
  return 0.5 * (lo + hi);
}

Barrier::Barrier(std::vector<double> z_nodes, std::vector<double> delta_crit)
    : z_(std::move(z_nodes)), crit_(std::move(delta_crit)) {
  if (z_.size() < 2 || z_.size() != crit_.size()) throw InternalError("Barrier: bad table");
  for (std::size_t i = 1; i < crit_.size(); ++i) crit_[i] = std::max(crit_[i], crit_[i - 1]);
  lowest_ = crit_[0];
  std::size_t top = 0;  // last finite node
  while (top + 1 < crit_.size() && std::isfinite(crit_[top + 1])) ++top;
  highest_ = crit_[top];
  if (!std::isfinite(lowest_)) return;  // never reached: redshift_reached is always -inf
  // Exact piecewise-linear inverse sampled on a uniform δ grid.
  const std::size_t n = 4096;
  d0_ = lowest_;
  dd_ = std::max(highest_ - lowest_, 1e-12) / static_cast<double>(n - 1);
  inv_dd_ = 1.0 / dd_;
  z_of_delta_.resize(n);
  std::size_t i = 0;
  for (std::size_t g = 0; g < n; ++g) {
    double d = std::min(d0_ + dd_ * static_cast<double>(g), highest_);
    while (i + 1 <= top && crit_[i + 1] <= d) ++i;
    double z;
    if (i >= top) {
      z = z_[top];
    } else {
      double span = crit_[i + 1] - crit_[i];
      double t = span > 0 ? (d - crit_[i]) / span : 0.0;
      z = z_[i] + t * (z_[i + 1] - z_[i]);
    }
    z_of_delta_[g] = static_cast<float>(z);
  }
}

double min_halo_mass(double T_vir_K, double z, const cosmo::Cosmology& c) {
  return cosmo::virial_mass_msun(T_vir_K, z, c, T_vir_K >= 1e4 ? 0.59 : 1.22);
}

}  // namespace spinflip::sim::detail
