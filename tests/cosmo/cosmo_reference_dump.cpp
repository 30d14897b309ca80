// Prints the background, growth and σ(R) of the default cosmology as JSON for
// tests/cosmo/check_cosmology.py (astropy and scipy reference checks).
#include <cmath>
#include <cstdio>

#include "cosmo/cosmology.hpp"

int main() {
  using namespace spinflip;
  const cosmo::Cosmology c;
  const auto& p = c.parameters();
  std::printf("{\"h\": %.17g, \"omega_m\": %.17g, \"omega_b\": %.17g, \"T_cmb_K\": %.17g, \"n_eff\": %.17g,\n",
              p.h, p.omega_m, p.omega_b, p.T_cmb_K, p.n_eff);
  std::printf("\"omega_r\": %.17g, \"background\": [", c.omega_r());
  const double zs[] = {0.05, 0.5, 1.0, 3.0, 6.0, 8.0, 10.0, 15.0, 20.0, 30.0, 50.0};
  bool first = true;
  for (double z : zs) {
    std::printf("%s[%.17g, %.17g, %.17g, %.17g, %.17g, %.17g]", first ? "" : ", ", z, c.comoving_distance_mpc(z),
                c.hubble_km_s_mpc(z), c.angular_diameter_distance_mpc(z), c.growth_factor(z), c.growth_rate(z));
    first = false;
  }
  std::printf("],\n\"power\": [");
  first = true;
  for (int i = 0; i <= 4000; ++i) {
    const double k = std::pow(10.0, -5.0 + 8.0 * i / 4000.0);
    std::printf("%s[%.17g, %.17g]", first ? "" : ", ", k, c.linear_power(k));
    first = false;
  }
  std::printf("],\n\"sigma\": [");
  first = true;
  for (double R : {0.5, 2.0, 8.0 / p.h, 30.0}) {
    std::printf("%s[%.17g, %.17g]", first ? "" : ", ", R, c.sigma_R(R));
    first = false;
  }
  std::printf("]}\n");
}
