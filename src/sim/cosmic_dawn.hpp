// Internal: the radiation fields of cosmic dawn on FFTW-MPI slabs and the
// forward integration of the gas temperature and X-ray ionization, cell by
// cell, from spin_temperature.start_redshift to each cell's own redshift; and
// the same equations for a uniform universe (the mean-field history).
// Method and sources: docs/lightcone.md, "Spin temperature".
#pragma once
#include <mpi.h>

#include <cstddef>
#include <vector>

#include "core/array.hpp"
#include "fft/fft.hpp"

namespace spinflip::cosmo { class Cosmology; }
namespace spinflip::sim { struct ConeSettings; }

namespace spinflip::sim::detail {

struct ModeBins;

/// The redshift nodes of the integration: from start_redshift down to (just below) z_low in
/// equal steps of ln(1+z), none larger than max_step_dlog1pz.
std::vector<double> dawn_redshift_nodes(const ConeSettings& s, double z_low);
/// Shell outer radii (Mpc): the first holds one cell's volume, the last is half the transverse box.
std::vector<double> dawn_shell_radii(const ConeSettings& s);

/// This rank's slab of the cone at each cell's own redshift (local_n0 × n_perp × n_los).
struct DawnCells {
  core::Array3<float> gas_K, x_e, lyman_alpha;  // T_K, X-ray ionized fraction, J_α (cm⁻² s⁻¹ Hz⁻¹ sr⁻¹)
  core::Array3<float> density;                  // δ at the cell's redshift (cell-volume sphere)
  std::size_t transforms = 0;                   // inverse transforms done (one per shell and step)
};

/// Collective on `group`. `lin`: the z = 0 density in Fourier space (as generate_cone leaves it);
/// `work`: a scratch field of the same layout; z_los: redshift of every LOS cell (increasing).
DawnCells dawn_cells(const ConeSettings& s, const cosmo::Cosmology& c, const std::vector<double>& z_los,
                     const fft::SlabField& lin, fft::SlabField& work, const ModeBins& bins, MPI_Comm group);

/// The same equations with δ = 0 everywhere and every shell at the mean emissivity.
struct MeanFieldHistory {
  std::vector<double> z, gas_K, x_e, lyman_alpha;
};
MeanFieldHistory mean_field_history(const ConeSettings& s, const cosmo::Cosmology& c, const std::vector<double>& z_out);

/// T_S and x_α of a cell from its T_K, x_e, J_α and density (Hirata 2006 correction; collisions
/// from spin_temperature.cpp). neutral: x_HI of the cell for the Gunn–Peterson depth.
struct CellSpin {
  double T_s_K, x_alpha;
};
CellSpin cell_spin(double z, double gas_K, double x_e, double lyman_alpha, double one_plus_delta,
                   const cosmo::Cosmology& c);

/// Mean star-formation rate density (Msun/yr per comoving Mpc³) of the source model, for tests.
double mean_sfrd_msun_yr_mpc3(const ConeSettings& s, const cosmo::Cosmology& c, double z);

}  // namespace spinflip::sim::detail
