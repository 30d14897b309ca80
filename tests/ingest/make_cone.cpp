// Test helper: one generated light cone (sim::generate_cone, default
// cosmology) written as OUT/cone.npy (float32, n_perp × n_perp × n_los, mK,
// LOS cell 0 nearest) and OUT/grid.npy (float64, 3 × n_los: comoving distance
// in Mpc, redshift, frequency in MHz per LOS cell centre), for the Python checks.
// Usage: ingest_make_cone OUT N_PERP N_LOS CELL_MPC Z_MIN Z_MAX SEED
#include <mpi.h>

#include <cstdlib>
#include <iostream>
#include <string>

#include "cosmo/cosmology.hpp"
#include "npy_write.hpp"
#include "sim/lightcone.hpp"

int main(int argc, char** argv) {
  using namespace spinflip;
  MPI_Init(&argc, &argv);
  if (argc != 8) {
    std::cerr << "usage: ingest_make_cone OUT N_PERP N_LOS CELL_MPC Z_MIN Z_MAX SEED\n";
    MPI_Finalize();
    return 2;
  }
  const std::string out = argv[1];
  sim::ConeSettings s;
  s.n_perp = std::stoul(argv[2]);
  s.n_los = std::stoul(argv[3]);
  s.cell_mpc = std::stod(argv[4]);
  s.z_min = std::stod(argv[5]);
  s.z_max = std::stod(argv[6]);
  s.bubble_radius_max_mpc = 20.0;
  s.n_radii = 8;
  const cosmo::Cosmology c;
  const rng::EntryKey key{.campaign_seed = std::stoull(argv[7]), .point = 0, .realisation = 0};
  const auto cone = sim::generate_cone(s, c, key, MPI_COMM_SELF);
  ingest::test::write_npy(out + "/cone.npy", {s.n_perp, s.n_perp, s.n_los}, cone.delta_tb_mK.data);
  std::vector<double> grid(cone.distance_mpc);
  grid.insert(grid.end(), cone.z.begin(), cone.z.end());
  grid.insert(grid.end(), cone.freq_MHz.begin(), cone.freq_MHz.end());
  ingest::test::write_npy(out + "/grid.npy", {3, s.n_los}, grid);
  MPI_Finalize();
  return 0;
}
