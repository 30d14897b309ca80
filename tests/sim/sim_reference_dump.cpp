// Prints (JSON) the linear P(k), the σ²(M) table, EPS collapsed fractions and
// mass-dependent ionizing yields of src/sim for check_excursion_scipy.py.
#include <cmath>
#include <cstdio>

#include "cosmo/cosmology.hpp"
#include "sim/excursion_set.hpp"

using namespace spinflip;
using namespace spinflip::sim::detail;

int main() {
  const cosmo::Cosmology c;
  const MassVariance mv(c, 1e4, 1e17, 480);
  std::printf("{\n\"rho_mean\": %.17g,\n\"pk\": [", c.mean_matter_density_msun_mpc3());
  for (int i = 0; i < 3000; ++i) {
    const double k = std::pow(10.0, -5.0 + 8.5 * i / 2999.0);
    std::printf("%s[%.17g, %.17g]", i ? ", " : "", k, c.linear_power(k, 0.0));
  }
  std::printf("],\n\"sigma2\": [");
  const double masses[] = {1e6, 1e8, 1e10, 1e12, 1e14, 1e16};
  for (int i = 0; i < 6; ++i) std::printf("%s[%.17g, %.17g]", i ? ", " : "", masses[i], mv.sigma2(masses[i]));
  std::printf("],\n\"fcoll\": [");
  // delta_R0, growth, M_R, M_min → f_coll
  const double cases[][4] = {{0.0, 0.1, 1e13, 1e8}, {1.2, 0.1, 1e13, 1e8}, {-0.8, 0.12, 1e12, 3e7},
                             {2.5, 0.09, 5e14, 1e9}, {0.3, 0.2, 1e11, 1e8}};
  for (int i = 0; i < 5; ++i) {
    const auto* q = cases[i];
    std::printf("%s[%.17g, %.17g, %.17g, %.17g, %.17g]", i ? ", " : "", q[0], q[1], q[2], q[3],
                collapsed_fraction(q[0], q[1], mv.sigma2(q[2]), mv.sigma2(q[3])));
  }
  std::printf("],\n\"yield\": [");
  Efficiency e;
  e.mass_dependent = true;  // defaults: Nγ = 5000, f*10 = 0.05, α* = 0.5, fesc10 = 0.1, αesc = −0.5, Mturn = 5e8
  for (int i = 0; i < 5; ++i) {
    const auto* q = cases[i];
    const double s_r = mv.sigma2(q[2]), s_min = mv.sigma2(q[3]);
    const double u = (delta_collapse / q[1] - q[0]) / std::sqrt(2 * (s_min - s_r));
    std::printf("%s[%.17g, %.17g, %.17g, %.17g, %.17g]", i ? ", " : "", q[0], q[1], q[2], q[3],
                ionizing_yield(e, mv, u, s_r, s_min));
  }
  std::printf("],\n\"efficiency\": {\"photons_per_baryon\": %.17g, \"fstar10\": %.17g, \"alpha_star\": %.17g, "
              "\"fesc10\": %.17g, \"alpha_esc\": %.17g, \"m_turn\": %.17g},\n\"delta_c\": %.17g\n}\n",
              e.photons_per_baryon, e.fstar10, e.alpha_star, e.fesc10, e.alpha_esc, e.m_turn_msun, delta_collapse);
  return 0;
}
