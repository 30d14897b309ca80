#include "sim/spin_temperature.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>

namespace spinflip::sim::detail {
namespace {

// Furlanetto, Oh & Briggs (2006) Table 2, κ_10^HH from Zygelman (2005) (values from memory).
constexpr std::array<double, 25> hh_T = {1,  2,  4,  6,  8,  10,  15,  20,  25,   30,   40,   50,  60,
                                         70, 80, 90, 100, 200, 300, 500, 700, 1000, 2000, 3000, 5000};
constexpr std::array<double, 25> hh_kappa = {
    1.38e-13, 1.43e-13, 2.71e-13, 6.60e-13, 1.47e-12, 2.88e-12, 9.10e-12, 1.78e-11, 2.73e-11,
    3.67e-11, 5.38e-11, 6.86e-11, 8.14e-11, 9.25e-11, 1.02e-10, 1.11e-10, 1.19e-10, 1.75e-10,
    2.09e-10, 2.56e-10, 2.91e-10, 3.31e-10, 4.27e-10, 4.97e-10, 6.03e-10};

// Pritchard & Furlanetto (2006) Table 1, n = 2 … 23 (values from memory).
constexpr std::array<double, 22> recycling = {1.0,    0.0,    0.2609, 0.3078, 0.3259, 0.3353, 0.3410, 0.3448,
                                              0.3476, 0.3496, 0.3512, 0.3524, 0.3535, 0.3543, 0.3550, 0.3556,
                                              0.3561, 0.3565, 0.3569, 0.3572, 0.3575, 0.3578};

/// Verner et al. (1996) eq. 1: σ = σ0 F(y), F = [(x−1)² + y_w²] y^{0.5P−5.5} (1 + √(y/y_a))^−P,
/// x = E/E0 − y0, y = √(x² + y1²); E0 in eV, σ0 in Mb.
struct VernerFit {
  double e_th_eV, e0_eV, sigma0_Mb, ya, p, yw, y0, y1;
  double operator()(double E_keV) const {
    const double e = E_keV * 1e3;
    if (e < e_th_eV) return 0.0;
    const double x = e / e0_eV - y0, y = std::sqrt(x * x + y1 * y1);
    const double f = ((x - 1) * (x - 1) + yw * yw) * std::pow(y, 0.5 * p - 5.5) * std::pow(1 + std::sqrt(y / ya), -p);
    return sigma0_Mb * f * 1e-18;
  }
};
// Verner et al. (1996) Table 1 (values from memory; at threshold they give 6.3e-18 and 7.4e-18 cm²).
constexpr VernerFit verner_hi{13.6, 0.4298, 5.475e4, 32.88, 2.963, 0.0, 0.0, 0.0};
constexpr VernerFit verner_hei{24.59, 13.61, 949.2, 1.469, 3.188, 2.039, 0.4434, 2.136};

}  // namespace

double lyman_recycling_fraction(int n) {
  return n >= 2 && n <= lyman_n_max ? recycling[static_cast<std::size_t>(n - 2)] : 0.0;
}

double lyman_frequency_Hz(int n) { return nu_lyman_limit_Hz * (1.0 - 1.0 / (static_cast<double>(n) * n)); }

double kappa_hh_cm3_s(double T_K) {
  const std::size_t n = hh_T.size();
  auto power_law = [&](std::size_t i, std::size_t j, double t) {
    const double slope = std::log(hh_kappa[j] / hh_kappa[i]) / std::log(hh_T[j] / hh_T[i]);
    return hh_kappa[i] * std::pow(t / hh_T[i], slope);
  };
  if (T_K <= hh_T[0]) return power_law(0, 1, T_K);
  if (T_K >= hh_T[n - 1]) return power_law(n - 2, n - 1, T_K);
  const auto hi = static_cast<std::size_t>(std::upper_bound(hh_T.begin(), hh_T.end(), T_K) - hh_T.begin());
  return power_law(hi - 1, hi, T_K);
}

double kappa_eh_cm3_s(double T_K) {
  // log10 κ_eH = −9.607 + 0.5 log10 T exp[−(log10 T)^4.5 / 1800], T ≤ 10⁴ K (from memory).
  const double lt = std::log10(std::clamp(T_K, 1.0, 1e4));
  return std::pow(10.0, -9.607 + 0.5 * lt * std::exp(-std::pow(lt, 4.5) / 1800.0));
}

double kappa_ph_cm3_s(double T_K) { return 3.2 * kappa_hh_cm3_s(T_K); }  // FOB06 §2.2 (from memory)

double collisional_coupling(double T_K, double T_cmb_K, double n_h_cm3, double x_e) {
  const double sum = n_h_cm3 * ((1.0 - x_e) * kappa_hh_cm3_s(T_K) + x_e * (kappa_eh_cm3_s(T_K) + kappa_ph_cm3_s(T_K)));
  return t_star_K / (a10_per_s * T_cmb_K) * sum;
}

double x_alpha_per_intensity(double T_cmb_K) {
  const double e2_over_mec = 4.80320471e-10 * 4.80320471e-10 / (9.1093837e-28 * 2.99792458e10);  // cm² s⁻¹
  const double f_alpha = 0.4162;  // oscillator strength of Lyman-α
  return 16.0 * std::numbers::pi * std::numbers::pi * t_star_K * e2_over_mec * f_alpha / (27.0 * a10_per_s * T_cmb_K);
}

double gunn_peterson_depth(double z, double neutral_density) {
  return 3e5 * std::max(neutral_density, 0.0) * std::pow((1.0 + z) / 7.0, 1.5);
}

SpinState spin_temperature(double T_K, double T_cmb_K, double x_alpha_tilde, double x_c, double tau_gp) {
  // Hirata (2006) eq. 40 (S_α) and eq. 42 (T_c), solved by fixed-point iteration in T_S
  // (both depend on T_S only weakly: a few steps reach double rounding).
  const double tk = std::max(T_K, 1.0);
  const double xi = std::cbrt(1e-7 * tau_gp) * std::pow(tk, -2.0 / 3.0);
  const double damp = 1.0 / (1.0 + xi * (2.98394 + xi * (1.53583 + xi * 3.85289)));
  double ts = (1.0 + x_alpha_tilde + x_c) / (1.0 / T_cmb_K + (x_alpha_tilde + x_c) / tk), xa = x_alpha_tilde;
  for (int it = 0; it < 30; ++it) {
    const double s_alpha =
        std::clamp((1.0 - 0.0631789 / tk + 0.115995 / (tk * tk) - 0.401403 / ts + 0.336463 / (ts * tk)) * damp, 0.0, 1.0);
    const double inv_tc = 1.0 / tk + 0.405535 / tk * (1.0 / ts - 1.0 / tk);
    xa = x_alpha_tilde * s_alpha;
    const double next = (1.0 + xa + x_c) / (1.0 / T_cmb_K + xa * inv_tc + x_c / tk);
    const bool done = std::abs(next - ts) <= 1e-12 * ts;
    ts = next;
    if (done) break;
  }
  return {ts, xa};
}

double sigma_hi_cm2(double E_keV) { return verner_hi(E_keV); }
double sigma_hei_cm2(double E_keV) { return verner_hei(E_keV); }

double heat_fraction(double x_e) {
  const double x = std::clamp(x_e, 1e-8, 1.0);
  return 0.9971 * (1.0 - std::pow(1.0 - std::pow(x, 0.2663), 1.3163));
}

double ionization_fraction(double x_e) {
  const double x = std::clamp(x_e, 1e-8, 1.0);
  return 0.3908 * std::pow(1.0 - std::pow(x, 0.4092), 1.7592);
}

double recombination_case_b(double T_K) { return 2.6e-13 * std::pow(std::max(T_K, 1.0) / 1e4, -0.7); }

double compton_rate_per_s(double T_cmb_K) {
  const double sigma_t = 6.6524587e-25, a_rad = 7.5657e-15, m_e = 9.1093837e-28, c = 2.99792458e10;
  const double t2 = T_cmb_K * T_cmb_K;
  return 8.0 * sigma_t * a_rad * t2 * t2 / (3.0 * m_e * c);
}

}  // namespace spinflip::sim::detail
