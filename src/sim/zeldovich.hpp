// Internal: the Zel'dovich (1970) displacement of the linear density and its cloud-in-cell
// deposit on FFTW-MPI slabs (axis 0 distributed). Exposed for tests.
#pragma once
#include <mpi.h>

#include <array>
#include <cstddef>
#include <vector>

#include "core/array.hpp"
#include "fft/fft.hpp"

namespace spinflip::sim::detail {

struct ZeldovichDeposit {
  double dropped_mass = 0;       // mass carried past the LOS ends, summed over the group (cells' worth)
  std::size_t ghost_planes = 0;  // planes of axis 0 exchanged on each side (0 on one rank)
};

/// ρ/ρ̄ on this rank's slab (local_n0 × n1 × n2) from one particle per cell, started at the cell
/// centre q and moved to x = q + D(z_k) ψ(q), with ψ(k) = i k δ0(k)/k² (so ∇·ψ = −δ0, the linear
/// Zel'dovich displacement) and D(z_k) the growth factor of the particle's own LOS cell, then
/// deposited by cloud-in-cell. Axes 0 and 1 are periodic; mass carried past either end of the
/// line of sight is dropped. `lin` holds δ0 in Fourier space as draw_linear_density leaves it
/// (its inverse gives δ0(x)); `psi` are three work fields of the same shape (overwritten).
/// Deposits that land on another rank's planes are sent to it (MPI_Alltoallv). Collective.
ZeldovichDeposit zeldovich_density(const fft::SlabField& lin, double cell_mpc, const std::vector<double>& growth,
                                   const std::array<fft::SlabField*, 3>& psi, core::Array3<float>& rho,
                                   MPI_Comm group);

}  // namespace spinflip::sim::detail
