// Prints what tests/sim/check_dawn_one_zone.py compares with its own one-zone integration:
// a uniform-density cone (δ0 = 0, reionization off) with the spin-temperature model, its plane
// means of T_K, x_e and x_α per LOS cell, and the inputs the Python side takes as given
// (growth factor, σ²(M_min), H(z) are checked elsewhere against astropy and scipy).
//   dawn_reference_dump [L_X] [E0_keV] [alpha_X] [N_lyman] [star_fraction]
#include <mpi.h>

#include <cmath>
#include <cstdio>
#include <cstdlib>

#include "cosmo/cosmology.hpp"
#include "sim/cosmic_dawn.hpp"
#include "sim/excursion_set.hpp"
#include "sim/lightcone.hpp"

using namespace spinflip;

int main(int argc, char** argv) {
  MPI_Init(&argc, &argv);
  sim::ConeSettings s;
  s.n_perp = 4;
  s.cell_mpc = 8.0;
  s.z_min = 6.0;
  s.z_max = 24.0;
  s.n_los = 360;
  s.reionization = false;
  s.velocity_gradient = false;
  s.uniform_density = true;
  s.spin.enabled = true;
  s.spin.start_redshift = 30.0;
  if (argc > 1) s.spin.xray_luminosity_erg_s_per_msun_yr = std::atof(argv[1]);
  if (argc > 2) s.spin.xray_threshold_energy_keV = std::atof(argv[2]);
  if (argc > 3) s.spin.xray_spectral_index = std::atof(argv[3]);
  if (argc > 4) s.spin.lyman_photons_per_stellar_baryon = std::atof(argv[4]);
  if (argc > 5) s.spin.star_fraction = std::atof(argv[5]);
  const cosmo::Cosmology c;
  const auto& p = c.parameters();
  std::printf("params h %.10g omega_m %.10g omega_b %.10g T_cmb %.10g n_eff %.10g L_X %.10g E0 %.10g alpha %.10g "
              "N_lyman %.10g f_star %.10g z_start %.10g T_vir %.10g\n",
              p.h, p.omega_m, p.omega_b, p.T_cmb_K, p.n_eff, s.spin.xray_luminosity_erg_s_per_msun_yr,
              s.spin.xray_threshold_energy_keV, s.spin.xray_spectral_index, s.spin.lyman_photons_per_stellar_baryon,
              s.spin.star_fraction, s.spin.start_redshift, s.min_virial_temperature_K);
  std::printf("rho_m_msun_mpc3 %.10g\n", c.mean_matter_density_msun_mpc3());
  const sim::detail::MassVariance mv(c, 1e6, 1e16, 600);
  for (double z = 5.5; z <= 31.0; z += 0.05) {
    const double m = sim::detail::min_halo_mass(s.min_virial_temperature_K, z, c);
    std::printf("table %.6f %.12g %.12g %.12g\n", z, c.growth_factor(z), mv.sigma2(m), c.hubble_km_s_mpc(z));
  }
  const auto cone = sim::generate_cone(s, c, rng::EntryKey{1, 0, 0}, MPI_COMM_SELF);
  const auto mean = sim::detail::mean_field_history(s, c, cone.z);
  for (std::size_t k = 0; k < cone.z.size(); k += 4)
    std::printf("cone %.6f %.10g %.10g %.10g %.10g %.10g %.10g\n", cone.z[k], cone.tk_mean_K[k], cone.x_e_mean[k],
                cone.x_alpha_mean[k], cone.ts_mean_K[k], mean.gas_K[k], mean.x_e[k]);
  MPI_Finalize();
  return 0;
}
