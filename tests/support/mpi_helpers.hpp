// Small MPI helpers for tests (tests/support/mpi_main.cpp runs MPI_Init).
#pragma once
#include <mpi.h>

namespace spinflip::test_support {
/// This process's rank in MPI_COMM_WORLD.
inline int world_rank() {
  int r = 0;
  MPI_Comm_rank(MPI_COMM_WORLD, &r);
  return r;
}

/// Sum of v over MPI_COMM_WORLD, on every rank.
inline double sum_all(double v) {
  MPI_Allreduce(MPI_IN_PLACE, &v, 1, MPI_DOUBLE, MPI_SUM, MPI_COMM_WORLD);
  return v;
}
}  // namespace spinflip::test_support
