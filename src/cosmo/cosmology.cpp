// Background, growth and linear power of flat ΛCDM. Distances and growth are
// tabulated once per Cosmology (cubic Hermite interpolation with the exact
// derivative, so the tables are accurate to ~1e-10); σ(R) is a spline of
// ln σ² in ln R over a k-integral done once.
#include "cosmo/cosmology.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>
#include <vector>

#include "core/errors.hpp"

namespace spinflip::cosmo {
namespace {

constexpr double pi = std::numbers::pi;
// CODATA 2018 / IAU values (from memory), as astropy uses them.
constexpr double G_si = 6.67430e-11;
constexpr double c_si = 299792458.0;
constexpr double sigma_sb_si = 5.670374419e-8;
constexpr double mpc_m = 3.085677581491367e22;
constexpr double msun_kg = 1.98840987e30;

double hermite(double x0, double x1, double y0, double y1, double d0, double d1, double x) {
  const double h = x1 - x0, t = (x - x0) / h, t2 = t * t, t3 = t2 * t;
  return (2 * t3 - 3 * t2 + 1) * y0 + (t3 - 2 * t2 + t) * h * d0 + (-2 * t3 + 3 * t2) * y1 + (t3 - t2) * h * d1;
}

/// Natural cubic spline on a uniform grid.
class UniformSpline {
 public:
  UniformSpline() = default;
  UniformSpline(double x0, double dx, std::vector<double> y) : x0_(x0), dx_(dx), y_(std::move(y)), m_(y_.size(), 0.0) {
    const std::size_t n = y_.size();
    std::vector<double> c(n, 0.0), d(n, 0.0);
    for (std::size_t i = 1; i + 1 < n; ++i) {
      const double rhs = 6.0 * (y_[i + 1] - 2 * y_[i] + y_[i - 1]) / (dx_ * dx_);
      const double denom = 4.0 - c[i - 1];
      c[i] = 1.0 / denom;
      d[i] = (rhs - d[i - 1]) / denom;
    }
    for (std::size_t i = n - 2; i >= 1; --i) {
      m_[i] = d[i] - c[i] * m_[i + 1];
      if (i == 1) break;
    }
  }
  double operator()(double x) const {
    const double s = (x - x0_) / dx_;
    auto i = static_cast<std::ptrdiff_t>(std::floor(s));
    i = std::clamp<std::ptrdiff_t>(i, 0, static_cast<std::ptrdiff_t>(y_.size()) - 2);
    const auto u = static_cast<std::size_t>(i);
    const double t = s - static_cast<double>(i), a = 1 - t;
    return a * y_[u] + t * y_[u + 1] + ((a * a * a - a) * m_[u] + (t * t * t - t) * m_[u + 1]) * dx_ * dx_ / 6.0;
  }
  double derivative(double x) const {
    const double s = (x - x0_) / dx_;
    auto i = static_cast<std::ptrdiff_t>(std::floor(s));
    i = std::clamp<std::ptrdiff_t>(i, 0, static_cast<std::ptrdiff_t>(y_.size()) - 2);
    const auto u = static_cast<std::size_t>(i);
    const double t = s - static_cast<double>(i), a = 1 - t;
    return (y_[u + 1] - y_[u]) / dx_ + ((-3 * a * a + 1) * m_[u] + (3 * t * t - 1) * m_[u + 1]) * dx_ / 6.0;
  }
  double x_min() const { return x0_; }
  double x_max() const { return x0_ + dx_ * static_cast<double>(y_.size() - 1); }

 private:
  double x0_ = 0, dx_ = 1;
  std::vector<double> y_, m_;
};

double top_hat(double x) {
  if (x < 1e-3) return 1.0 - x * x / 10.0;
  return 3.0 * (std::sin(x) - x * std::cos(x)) / (x * x * x);
}

}  // namespace

double frequency_MHz(double z) { return nu21_MHz / (1.0 + z); }
double redshift_at_frequency(double nu_MHz) { return nu21_MHz / nu_MHz - 1.0; }

struct Cosmology::Impl {
  Parameters p;
  double omega_r = 0, omega_l = 0, hubble_distance = 0;  // c/H0 in Mpc
  // Eisenstein & Hu (1998) quantities.
  double theta = 0, om_h2 = 0, ob_h2 = 0, f_b = 0, f_c = 0, z_eq = 0, k_eq = 0, z_d = 0, R_d = 0, R_eq = 0;
  double s = 0, k_silk = 0, alpha_c = 0, beta_c = 0, alpha_b = 0, beta_b = 0, beta_node = 0;
  double alpha_gamma = 0, s_fit = 0;
  double amplitude = 1;  // P(k) = amplitude k^n_s T(k)^2 at z = 0
  // Comoving distance table in u = ln(1+z).
  double u_step = 0;
  std::vector<double> dist, ddist_du;
  // Growth table in x = ln a (from x_lo to 0).
  double x_lo = 0, x_step = 0;
  std::vector<double> growth, dgrowth;  // unnormalised D and dD/dlna
  double growth_today = 1;
  // σ²(R) at z = 0.
  UniformSpline ln_sigma2;  // of ln R

  double E(double z) const {
    const double a1 = 1.0 + z;
    return std::sqrt(p.omega_m * a1 * a1 * a1 + omega_r * a1 * a1 * a1 * a1 + omega_l);
  }

  void background() {
    if (!(p.h > 0 && p.omega_m > 0 && p.omega_b >= 0 && p.omega_b < p.omega_m && p.sigma8 > 0 && p.T_cmb_K >= 0 &&
          p.n_eff >= 0))
      throw ModelError("cosmology: parameters out of range (need h>0, 0<=omega_b<omega_m, sigma8>0, T_cmb>=0)");
    const double H0_si = p.h * 100.0 * 1e3 / mpc_m;
    const double rho_crit = 3.0 * H0_si * H0_si / (8.0 * pi * G_si);  // kg/m^3
    const double rho_gamma = 4.0 * sigma_sb_si * std::pow(p.T_cmb_K, 4) / (c_si * c_si * c_si);
    const double omega_gamma = rho_gamma / rho_crit;
    // Massless neutrinos: (7/8)(4/11)^{4/3} per species (common practice).
    omega_r = omega_gamma * (1.0 + 7.0 / 8.0 * std::pow(4.0 / 11.0, 4.0 / 3.0) * p.n_eff);
    omega_l = 1.0 - p.omega_m - omega_r;
    hubble_distance = c_km_s / (100.0 * p.h);
  }

  void distance_table() {
    const double u_max = std::log(1.0 + 1200.0);
    const std::size_t n = 24000;
    u_step = u_max / static_cast<double>(n - 1);
    dist.assign(n, 0.0);
    ddist_du.assign(n, 0.0);
    // Integrand in u: dD/du = (1+z) c/H(z).
    auto f = [&](double u) {
      const double z = std::exp(u) - 1.0;
      return (1.0 + z) * hubble_distance / E(z);
    };
    ddist_du[0] = f(0.0);
    // 4-point Gauss–Legendre per interval.
    const double gx[4] = {-0.8611363115940526, -0.3399810435848563, 0.3399810435848563, 0.8611363115940526};
    const double gw[4] = {0.3478548451374538, 0.6521451548625461, 0.6521451548625461, 0.3478548451374538};
    for (std::size_t i = 1; i < n; ++i) {
      const double a = u_step * static_cast<double>(i - 1), b = a + u_step;
      double sum = 0;
      for (int q = 0; q < 4; ++q) sum += gw[q] * f(0.5 * (a + b) + 0.5 * (b - a) * gx[q]);
      dist[i] = dist[i - 1] + 0.5 * (b - a) * sum;
      ddist_du[i] = f(b);
    }
  }

  double comoving(double z) const {
    if (!(z >= 0)) throw ModelError("cosmology: redshift must be >= 0, got " + std::to_string(z));
    const double u = std::log1p(z);
    const double s = u / u_step;
    auto i = static_cast<std::size_t>(s);
    if (i + 1 >= dist.size()) throw ModelError("cosmology: redshift " + std::to_string(z) + " beyond 1200");
    return hermite(u_step * static_cast<double>(i), u_step * static_cast<double>(i + 1), dist[i], dist[i + 1],
                   ddist_du[i], ddist_du[i + 1], u);
  }

  void growth_table() {
    // d²D/dx² + (2 + dlnE/dx) dD/dx − 1.5 Ωm(a) D = 0, x = ln a. Start deep in
    // the radiation era on the Mészáros growing mode D = 1 + 3y/2, y = a/a_eq.
    const std::size_t n = 20001;
    x_lo = std::log(1e-7);
    x_step = -x_lo / static_cast<double>(n - 1);
    growth.assign(n, 0.0);
    dgrowth.assign(n, 0.0);
    const double a_eq = omega_r / p.omega_m;
    const double a0 = std::exp(x_lo);
    double D = omega_r > 0 ? 1.0 + 1.5 * a0 / a_eq : a0;
    double dD = omega_r > 0 ? 1.5 * a0 / a_eq : a0;
    auto rhs = [&](double x, double d, double dd, double& out_d, double& out_dd) {
      const double a = std::exp(x);
      const double m = p.omega_m / (a * a * a), r = omega_r / (a * a * a * a);
      const double E2 = m + r + omega_l;
      const double dlnE = (-3.0 * m - 4.0 * r) / (2.0 * E2);
      out_d = dd;
      out_dd = -(2.0 + dlnE) * dd + 1.5 * (m / E2) * d;
    };
    growth[0] = D;
    dgrowth[0] = dD;
    for (std::size_t i = 1; i < n; ++i) {
      const double x = x_lo + x_step * static_cast<double>(i - 1), h = x_step;
      double k1d, k1v, k2d, k2v, k3d, k3v, k4d, k4v;
      rhs(x, D, dD, k1d, k1v);
      rhs(x + h / 2, D + h / 2 * k1d, dD + h / 2 * k1v, k2d, k2v);
      rhs(x + h / 2, D + h / 2 * k2d, dD + h / 2 * k2v, k3d, k3v);
      rhs(x + h, D + h * k3d, dD + h * k3v, k4d, k4v);
      D += h / 6 * (k1d + 2 * k2d + 2 * k3d + k4d);
      dD += h / 6 * (k1v + 2 * k2v + 2 * k3v + k4v);
      growth[i] = D;
      dgrowth[i] = dD;
    }
    growth_today = growth.back();
  }

  void growth_at(double z, double& D, double& dD) const {
    if (!(z >= 0)) throw ModelError("cosmology: redshift must be >= 0, got " + std::to_string(z));
    const double x = -std::log1p(z);
    if (x < x_lo) throw ModelError("cosmology: redshift " + std::to_string(z) + " beyond the growth table");
    const double s = (x - x_lo) / x_step;
    auto i = std::min(static_cast<std::size_t>(s), growth.size() - 2);
    const double x0 = x_lo + x_step * static_cast<double>(i), x1 = x0 + x_step;
    D = hermite(x0, x1, growth[i], growth[i + 1], dgrowth[i], dgrowth[i + 1], x);
    // dD/dx by linear interpolation of the exact derivative (ample for f).
    const double t = (x - x0) / x_step;
    dD = dgrowth[i] * (1 - t) + dgrowth[i + 1] * t;
  }

  void eisenstein_hu() {
    // Eisenstein & Hu (1998), ApJ 496, 605: equation numbers in comments.
    theta = p.T_cmb_K / 2.7;
    om_h2 = p.omega_m * p.h * p.h;
    ob_h2 = p.omega_b * p.h * p.h;
    f_b = p.omega_b / p.omega_m;
    f_c = 1.0 - f_b;
    const double th2 = theta * theta, th4 = th2 * th2;
    z_eq = 2.50e4 * om_h2 / th4;                 // eq. 2
    k_eq = 7.46e-2 * om_h2 / th2;                // eq. 3, Mpc^-1
    const double b1 = 0.313 * std::pow(om_h2, -0.419) * (1 + 0.607 * std::pow(om_h2, 0.674));
    const double b2 = 0.238 * std::pow(om_h2, 0.223);
    z_d = 1291 * std::pow(om_h2, 0.251) / (1 + 0.659 * std::pow(om_h2, 0.828)) * (1 + b1 * std::pow(ob_h2, b2));  // eq. 4
    auto R = [&](double z) { return 31.5 * ob_h2 / th4 / (z / 1e3); };  // eq. 5
    R_d = R(z_d);
    R_eq = R(z_eq);
    s = 2.0 / (3.0 * k_eq) * std::sqrt(6.0 / R_eq) *
        std::log((std::sqrt(1 + R_d) + std::sqrt(R_d + R_eq)) / (1 + std::sqrt(R_eq)));  // eq. 6
    k_silk = 1.6 * std::pow(ob_h2, 0.52) * std::pow(om_h2, 0.73) * (1 + std::pow(10.4 * om_h2, -0.95));  // eq. 7
    const double a1 = std::pow(46.9 * om_h2, 0.670) * (1 + std::pow(32.1 * om_h2, -0.532));
    const double a2 = std::pow(12.0 * om_h2, 0.424) * (1 + std::pow(45.0 * om_h2, -0.582));
    alpha_c = std::pow(a1, -f_b) * std::pow(a2, -f_b * f_b * f_b);  // eq. 11
    const double bb1 = 0.944 / (1 + std::pow(458 * om_h2, -0.708));
    const double bb2 = std::pow(0.395 * om_h2, -0.0266);
    beta_c = 1.0 / (1 + bb1 * (std::pow(f_c, bb2) - 1));  // eq. 12
    const double y = (1 + z_eq) / (1 + z_d);
    const double sq = std::sqrt(1 + y);
    const double G = y * (-6 * sq + (2 + 3 * y) * std::log((sq + 1) / (sq - 1)));  // eq. 15
    alpha_b = 2.07 * k_eq * s * std::pow(1 + R_d, -0.75) * G;                    // eq. 14
    beta_b = 0.5 + f_b + (3 - 2 * f_b) * std::sqrt(std::pow(17.2 * om_h2, 2) + 1);  // eq. 24
    beta_node = 8.41 * std::pow(om_h2, 0.435);                                      // eq. 23
    // No-wiggle form, eqs. 26, 30.
    s_fit = 44.5 * std::log(9.83 / om_h2) / std::sqrt(1 + 10 * std::pow(ob_h2, 0.75));
    alpha_gamma = 1 - 0.328 * std::log(431 * om_h2) * f_b + 0.38 * std::log(22.3 * om_h2) * f_b * f_b;
  }

  double transfer(double k) const {
    if (k <= 0) return 1.0;
    if (!p.baryon_wiggles) {
      const double gamma_eff = p.omega_m * p.h * (alpha_gamma + (1 - alpha_gamma) / (1 + std::pow(0.43 * k * s_fit, 4)));  // eq. 31
      const double q = k / p.h * theta * theta / gamma_eff;  // eq. 28 (k in h/Mpc)
      const double L0 = std::log(2 * std::numbers::e + 1.8 * q);
      const double C0 = 14.2 + 731 / (1 + 62.5 * q);
      return L0 / (L0 + C0 * q * q);  // eq. 29
    }
    const double q = k / (13.41 * k_eq);  // eq. 10
    auto T0 = [&](double ac, double bc) {  // eqs. 19, 20
      const double L = std::log(std::numbers::e + 1.8 * bc * q);
      const double C = 14.2 / ac + 386 / (1 + 69.9 * std::pow(q, 1.08));
      return L / (L + C * q * q);
    };
    const double ks = k * s;
    const double f = 1 / (1 + std::pow(ks / 5.4, 4));              // eq. 18
    const double Tc = f * T0(1, beta_c) + (1 - f) * T0(alpha_c, beta_c);  // eq. 17
    const double s_tilde = s / std::cbrt(1 + std::pow(beta_node / ks, 3));  // eq. 22
    const double x = k * s_tilde;
    const double j0 = x < 1e-6 ? 1.0 : std::sin(x) / x;
    const double Tb = (T0(1, 1) / (1 + std::pow(ks / 5.2, 2)) +
                       alpha_b / (1 + std::pow(beta_b / ks, 3)) * std::exp(-std::pow(k / k_silk, 1.4))) * j0;  // eq. 21
    return f_b * Tb + f_c * Tc;  // eq. 16
  }

  /// σ²(R) at z = 0 for the unnormalised spectrum k^n T², on a log-R grid.
  void sigma_table() {
    const double lnk_lo = std::log(1e-6), lnk_hi = std::log(1e4);
    const std::size_t nk = 6000;
    const double dlnk = (lnk_hi - lnk_lo) / static_cast<double>(nk - 1);
    std::vector<double> k(nk), w(nk);  // k and Simpson-weighted k³P/(2π²)
    for (std::size_t i = 0; i < nk; ++i) {
      k[i] = std::exp(lnk_lo + dlnk * static_cast<double>(i));
      const double T = transfer(k[i]);
      const double simpson = (i == 0 || i + 1 == nk) ? 1.0 : (i % 2 == 1 ? 4.0 : 2.0);
      w[i] = simpson * dlnk / 3.0 * std::pow(k[i], 3.0 + p.n_s) * T * T / (2 * pi * pi);
    }
    auto sigma2 = [&](double R) {
      double sum = 0;
      for (std::size_t i = 0; i < nk; ++i) {
        const double W = top_hat(k[i] * R);
        sum += w[i] * W * W;
      }
      return sum;
    };
    amplitude = p.sigma8 * p.sigma8 / sigma2(8.0 / p.h);
    const double lnR_lo = std::log(1e-3), lnR_hi = std::log(5e3);
    const std::size_t nR = 321;
    const double dlnR = (lnR_hi - lnR_lo) / static_cast<double>(nR - 1);
    std::vector<double> ln_s2(nR);
    for (std::size_t j = 0; j < nR; ++j) ln_s2[j] = std::log(amplitude * sigma2(std::exp(lnR_lo + dlnR * static_cast<double>(j))));
    ln_sigma2 = UniformSpline(lnR_lo, dlnR, std::move(ln_s2));
  }

  double sigma2_R0(double R) const {
    const double x = std::log(R);
    if (!(x >= ln_sigma2.x_min() && x <= ln_sigma2.x_max()))
      throw ModelError("cosmology: smoothing radius " + std::to_string(R) + " Mpc outside [1e-3, 5e3] Mpc");
    return std::exp(ln_sigma2(x));
  }

  double rho_m() const {
    const double H0_si = p.h * 100.0 * 1e3 / mpc_m;
    const double rho_crit = 3.0 * H0_si * H0_si / (8.0 * pi * G_si);  // kg/m^3
    return p.omega_m * rho_crit * mpc_m * mpc_m * mpc_m / msun_kg;
  }
};

Cosmology::Cosmology(const Parameters& p) : impl_(std::make_unique<Impl>()) {
  impl_->p = p;
  impl_->background();
  impl_->distance_table();
  impl_->growth_table();
  impl_->eisenstein_hu();
  impl_->sigma_table();
}
Cosmology::Cosmology(const Cosmology& o) : impl_(std::make_unique<Impl>(*o.impl_)) {}
Cosmology& Cosmology::operator=(const Cosmology& o) {
  if (this != &o) impl_ = std::make_unique<Impl>(*o.impl_);
  return *this;
}
Cosmology::~Cosmology() = default;

const Parameters& Cosmology::parameters() const { return impl_->p; }
double Cosmology::omega_r() const { return impl_->omega_r; }
double Cosmology::omega_lambda() const { return impl_->omega_l; }
double Cosmology::E(double z) const { return impl_->E(z); }
double Cosmology::hubble_km_s_mpc(double z) const { return 100.0 * impl_->p.h * impl_->E(z); }
double Cosmology::comoving_distance_mpc(double z) const { return impl_->comoving(z); }
double Cosmology::angular_diameter_distance_mpc(double z) const { return impl_->comoving(z) / (1.0 + z); }
double Cosmology::omega_m_at(double z) const {
  const double a1 = 1.0 + z, e = impl_->E(z);
  return impl_->p.omega_m * a1 * a1 * a1 / (e * e);
}

double Cosmology::redshift_at_comoving_distance(double d) const {
  const auto& m = *impl_;
  if (!(d >= 0) || d > m.dist.back())
    throw ModelError("cosmology: comoving distance " + std::to_string(d) + " Mpc outside [0, " +
                           std::to_string(m.dist.back()) + "]");
  const auto it = std::upper_bound(m.dist.begin(), m.dist.end(), d);
  const auto i = static_cast<std::size_t>(std::max<std::ptrdiff_t>(it - m.dist.begin() - 1, 0));
  double u = m.u_step * static_cast<double>(i);
  // Newton on D(u) = d with dD/du = (1+z) c/H.
  for (int iter = 0; iter < 30; ++iter) {
    const double z = std::expm1(u);
    const double r = m.comoving(z) - d;
    const double step = r / ((1.0 + z) * m.hubble_distance / m.E(z));
    u -= step;
    u = std::max(u, 0.0);
    if (std::abs(step) < 1e-14) break;
  }
  return std::expm1(u);
}

double Cosmology::growth_factor(double z) const {
  double D, dD;
  impl_->growth_at(z, D, dD);
  return D / impl_->growth_today;
}
double Cosmology::growth_rate(double z) const {
  double D, dD;
  impl_->growth_at(z, D, dD);
  return dD / D;
}

double Cosmology::sound_horizon_mpc() const { return impl_->s; }
double Cosmology::k_silk_mpc() const { return impl_->k_silk; }
double Cosmology::transfer(double k) const { return impl_->transfer(k); }
double Cosmology::linear_power(double k, double z) const {
  if (k <= 0) return 0.0;
  const double T = impl_->transfer(k);
  const double D = z == 0.0 ? 1.0 : growth_factor(z);
  return impl_->amplitude * std::pow(k, impl_->p.n_s) * T * T * D * D;
}
double Cosmology::sigma_R(double r, double z) const {
  const double D = z == 0.0 ? 1.0 : growth_factor(z);
  return std::sqrt(impl_->sigma2_R0(r)) * D;
}
double Cosmology::mean_matter_density_msun_mpc3() const { return impl_->rho_m(); }
double Cosmology::mass_of_radius(double r) const { return 4.0 * pi / 3.0 * impl_->rho_m() * r * r * r; }
double Cosmology::radius_of_mass(double m) const { return std::cbrt(3.0 * m / (4.0 * pi * impl_->rho_m())); }
double Cosmology::sigma_M(double m, double z) const { return sigma_R(radius_of_mass(m), z); }
double Cosmology::dsigma2_dM(double m) const {
  // dσ²/dM = σ² dlnσ²/dlnR · (1/3M), the spline's derivative in ln R.
  const double R = radius_of_mass(m);
  const double x = std::log(R);
  const double s2 = impl_->sigma2_R0(R);
  return s2 * impl_->ln_sigma2.derivative(x) / (3.0 * m);
}

namespace {
double delta_vir_factor(double z, const Cosmology& c) {
  // Barkana & Loeb (2001) eq. 22–26: Δc = 18π² + 82d − 39d², d = Ωm(z) − 1.
  const double om_z = c.omega_m_at(z);
  const double d = om_z - 1.0;
  const double delta_c = 18 * pi * pi + 82 * d - 39 * d * d;
  return c.parameters().omega_m / om_z * delta_c / (18 * pi * pi);
}
}  // namespace

double virial_temperature_K(double m, double z, const Cosmology& c, double mu) {
  const double h = c.parameters().h;
  // Barkana & Loeb (2001) eq. 26.
  return 1.98e4 * (mu / 0.6) * std::pow(m * h / 1e8, 2.0 / 3.0) * std::cbrt(delta_vir_factor(z, c)) * (1 + z) / 10.0;
}

double virial_mass_msun(double T, double z, const Cosmology& c, double mu) {
  if (!(T > 0)) throw ModelError("virial temperature must be > 0 K, got " + std::to_string(T));
  const double h = c.parameters().h;
  const double x = T / (1.98e4 * (mu / 0.6) * std::cbrt(delta_vir_factor(z, c)) * (1 + z) / 10.0);
  return 1e8 / h * std::pow(x, 1.5);
}

double tb_prefactor_mK(double z, const Cosmology& c) {
  const auto& p = c.parameters();
  const double h2 = p.h * p.h;
  return 27.0 * (p.omega_b * h2 / 0.023) * std::sqrt(0.15 / (p.omega_m * h2) * (1 + z) / 10.0);
}

void declare_keys(core::Schema& s) {
  using core::ValueType;
  s.add_table("cosmology", "Flat ΛCDM background and linear power (defaults: Planck 2018 TT,TE,EE+lowE+lensing).");
  const Parameters d;
  s.add({.path = "cosmology.h", .type = ValueType::real, .default_value = d.h, .min = 0.3, .max = 1.2,
         .doc = "dimensionless Hubble constant H0 / (100 km/s/Mpc)", .can_vary = true});
  s.add({.path = "cosmology.omega_m", .type = ValueType::real, .default_value = d.omega_m, .min = 0.05, .max = 0.9,
         .doc = "total matter density today (CDM + baryons), in units of the critical density", .can_vary = true});
  s.add({.path = "cosmology.omega_b", .type = ValueType::real, .default_value = d.omega_b, .min = 0.005, .max = 0.2,
         .doc = "baryon density today, in units of the critical density", .can_vary = true});
  s.add({.path = "cosmology.n_s", .type = ValueType::real, .default_value = d.n_s, .min = 0.7, .max = 1.3,
         .doc = "primordial spectral index", .can_vary = true});
  s.add({.path = "cosmology.sigma8", .type = ValueType::real, .default_value = d.sigma8, .min = 0.3, .max = 1.5,
         .doc = "rms linear density in 8/h Mpc top-hat spheres today", .can_vary = true});
  s.add({.path = "cosmology.T_cmb_K", .type = ValueType::real, .default_value = d.T_cmb_K, .unit = "K", .min = 0.0,
         .max = 10.0, .doc = "CMB temperature today"});
  s.add({.path = "cosmology.n_eff", .type = ValueType::real, .default_value = d.n_eff, .min = 0.0, .max = 10.0,
         .doc = "effective number of (massless) neutrino species in the radiation density"});
  s.add({.path = "cosmology.baryon_wiggles", .type = ValueType::boolean, .default_value = d.baryon_wiggles,
         .doc = "Eisenstein & Hu transfer function with acoustic oscillations (false: their no-wiggle form)"});
}

Parameters parameters_from(const core::Config& config) {
  Parameters p;
  p.h = config.real("cosmology.h");
  p.omega_m = config.real("cosmology.omega_m");
  p.omega_b = config.real("cosmology.omega_b");
  p.n_s = config.real("cosmology.n_s");
  p.sigma8 = config.real("cosmology.sigma8");
  p.T_cmb_K = config.real("cosmology.T_cmb_K");
  p.n_eff = config.real("cosmology.n_eff");
  p.baryon_wiggles = config.boolean("cosmology.baryon_wiggles");
  if (!(p.omega_b < p.omega_m)) config.fail("cosmology.omega_b", "must be below cosmology.omega_m");
  return p;
}

}  // namespace spinflip::cosmo
