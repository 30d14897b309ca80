// Writes the sample catalogue (sample_layout.hpp) from every rank of the
// world: entry e by rank e mod size, entry 4 failed, entry 7 left pending.
// Usage: mpiexec -n N write_sample OUT.h5 [complete]  (read back by the h5py check;
// `complete`: every entry written, none failed or pending)
#include <mpi.h>

#include <cstdio>
#include <string>

#include "catalogue/catalogue.hpp"
#include "core/errors.hpp"
#include "sample_layout.hpp"

int main(int argc, char** argv) {
  MPI_Init(&argc, &argv);
  int status = 0;
  try {
    if (argc < 2 || argc > 3) throw spinflip::InputError("usage: write_sample OUT.h5 [complete]");
    const bool complete = argc == 3 && std::string(argv[2]) == "complete";
    int rank = 0, size = 1;
    MPI_Comm_rank(MPI_COMM_WORLD, &rank);
    MPI_Comm_size(MPI_COMM_WORLD, &size);
    using namespace spinflip::catalogue;
    Layout L = testing::sample_layout();
    Catalogue cat = Catalogue::create(argv[1], L, MPI_COMM_WORLD);
    for (std::size_t e = 0; e < L.entries.size(); ++e) {
      if (static_cast<int>(e % static_cast<std::size_t>(size)) != rank || (e == 7 && !complete)) continue;
      if (e == 4 && !complete)
        cat.write_failure(e, "ModelError: sample failure", 0.1, rank);
      else
        cat.write_entry(e, testing::sample_result(L, e, rank));
    }
    cat.close();
  } catch (const std::exception& e) {
    std::fprintf(stderr, "write_sample: %s\n", e.what());
    status = 1;
  }
  MPI_Finalize();
  return status;
}
