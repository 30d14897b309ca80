// Internal: the extended-Press-Schechter pieces of the excursion-set model
// (collapsed fraction, ionizing yield of the two source models, the critical
// density of each radius as a function of redshift). Exposed for tests.
#pragma once
#include <algorithm>
#include <cstddef>
#include <limits>
#include <vector>

namespace spinflip::cosmo { class Cosmology; }
namespace spinflip::sim { struct ConeSettings; }

namespace spinflip::sim::detail {

inline constexpr double delta_collapse = 1.686;  // spherical-collapse threshold (common practice)

/// σ²(M) of the linear field at z = 0, tabulated in ln M with an O(1) inverse.
class MassVariance {
 public:
  MassVariance(const cosmo::Cosmology& c, double m_lo_msun, double m_hi_msun, std::size_t nodes);
  double sigma2(double m_msun) const;
  double mass_of_sigma2(double s) const;  // inverse (clamped to the table's range)
  double m_lo() const { return m_lo_; }
  double m_hi() const { return m_hi_; }

 private:
  double m_lo_, m_hi_, lnm0_, dlnm_;
  std::vector<double> s_;            // σ² at ln M nodes (decreasing)
  double lns0_, dlns_;
  std::vector<double> lnm_of_lns_;  // ln M on a uniform ln σ² grid
};

/// The number of ionizing photons per baryon that a halo of mass M releases.
struct Efficiency {
  bool mass_dependent = false;
  double zeta = 30.0;  // constant model
  double photons_per_baryon = 5000.0, fstar10 = 0.05, alpha_star = 0.5, fesc10 = 0.1, alpha_esc = -0.5,
         m_turn_msun = 5e8;
  double operator()(double m_msun) const;
};

/// The ionizing efficiency of a cone's source model (sources.* keys).
Efficiency ionizing_efficiency_of(const ConeSettings& s);

/// Ionizing yield of a region: F = ∫ ζ(M) (dF_coll/dM)(M | δ_R, R) dM over M_min..M_R with the
/// EPS conditional mass function. Written with u = B/√(2(σ²(M)−σ²_R)), B = δ_c/D(z) − δ_R0,
/// the integral is F = ∫_{u_min}^∞ ζ(M(u)) (2/√π) e^{−u²} du with
/// σ²(M(u)) = σ²_R + (σ²_min − σ²_R) u_min²/u², u_min = B/√(2(σ²_min − σ²_R)).
/// For constant ζ this is ζ erfc(u_min) = ζ f_coll. s_R = σ²_R, s_min = σ²(M_min).
double ionizing_yield(const Efficiency& e, const MassVariance& mv, double u_min, double s_R, double s_min);

/// EPS collapsed fraction f_coll = erfc[(δ_c/D − δ_R0)/√(2(σ²_min − σ²_R))] (1 if collapsed).
double collapsed_fraction(double delta_R0, double growth, double s_R, double s_min);

/// u* with F(u*) = 1 (F falls with u_min); negative when the region can never reach F = 1.
double critical_u(const Efficiency& e, const MassVariance& mv, double s_R, double s_min);

/// Inverse of erfc on (0, 2).
double erfc_inverse(double y);

/// Critical z = 0 density of one radius on a redshift grid, made non-decreasing in z
/// (a running maximum from low z, so that an ionized cell stays ionized toward low z),
/// with an O(1) inverse: the highest tabulated redshift whose barrier δ_R0 reaches.
class Barrier {
 public:
  Barrier(std::vector<double> z_nodes, std::vector<double> delta_crit);
  /// Highest z (linear between nodes) with barrier(z) ≤ δ; -inf if below the lowest node.
  double redshift_reached(double delta_R0) const {
    if (!(delta_R0 >= lowest_)) return -std::numeric_limits<double>::infinity();
    if (delta_R0 >= highest_) return z_of_delta_.back();
    const double x = (delta_R0 - d0_) * inv_dd_;
    const auto g = std::min(static_cast<std::size_t>(x), z_of_delta_.size() - 2);
    const double t = x - static_cast<double>(g);
    return z_of_delta_[g] * (1 - t) + z_of_delta_[g + 1] * t;
  }
  double lowest() const { return lowest_; }
  /// The uniform-δ table behind redshift_reached: node g at δ = table_start() + g / table_inverse_step()
  /// (for vectorized passes; empty when the barrier is never reached).
  const std::vector<float>& z_table() const { return z_of_delta_; }
  double table_start() const { return d0_; }
  double table_inverse_step() const { return inv_dd_; }
  double highest_redshift() const { return z_.back(); }
  const std::vector<double>& delta_crit() const { return crit_; }

 private:
  std::vector<double> z_, crit_;
  double lowest_, highest_, d0_ = 0, dd_ = 1, inv_dd_ = 1;
  std::vector<float> z_of_delta_;
};

/// Minimum halo mass at z from a minimum virial temperature (Barkana & Loeb 2001;
/// μ = 0.59 above 1e4 K (ionized gas), 1.22 below (neutral)).
double min_halo_mass(double T_vir_K, double z, const cosmo::Cosmology& c);

}  // namespace spinflip::sim::detail
