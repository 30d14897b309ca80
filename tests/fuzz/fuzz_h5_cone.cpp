// libFuzzer target: the ingest HDF5 cone reader (header, LOS coordinates, a
// block read, the NaN scan). The input bytes decide the *content* of a file
// that the HDF5 library itself writes — which datasets exist, their rank,
// shape, type and values, the LOS coordinate dataset — rather than being the
// file's raw bytes: mutating raw HDF5 bytes mostly exercises the HDF5
// library's own parser, whose crashes this project cannot fix, while the
// content is what a user's file gets wrong (the wrong dataset, a 2D array, a
// string type, an empty axis, NaN coordinates).
#include <fuzzer/FuzzedDataProvider.h>
#include <hdf5.h>
#include <mpi.h>

#include <cmath>
#include <limits>
#include <vector>

#include "fuzz_contract.hpp"
#include "ingest/internal.hpp"

namespace {

void write_dataset(hid_t file, const std::string& name, FuzzedDataProvider& in) {
  const int rank = in.ConsumeIntegralInRange(0, 4);
  std::vector<hsize_t> dims(static_cast<std::size_t>(rank));
  hsize_t n = 1;
  for (auto& d : dims) n *= (d = in.ConsumeIntegralInRange<hsize_t>(0, 9));
  const hid_t types[] = {H5T_NATIVE_FLOAT, H5T_NATIVE_DOUBLE, H5T_NATIVE_INT32, H5T_NATIVE_INT8,
                         H5T_IEEE_F32BE, H5T_IEEE_F64BE, H5T_NATIVE_UINT64};
  const hid_t type = types[in.ConsumeIntegralInRange<std::size_t>(0, std::size(types) - 1)];
  std::vector<double> values(n);
  const double specials[] = {0.0, -1.0, 1e300, std::numeric_limits<double>::quiet_NaN(),
                             std::numeric_limits<double>::infinity(), 150.0, 140.0};
  for (auto& v : values)
    v = in.ConsumeBool() ? specials[in.ConsumeIntegralInRange<std::size_t>(0, std::size(specials) - 1)]
                         : in.ConsumeFloatingPointInRange<double>(-1e3, 1e3);
  const hid_t space = rank == 0 ? H5Screate(H5S_SCALAR) : H5Screate_simple(rank, dims.data(), nullptr);
  const hid_t ds = H5Dcreate2(file, name.c_str(), type, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
  if (ds >= 0) {
    if (n > 0) H5Dwrite(ds, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, values.data());
    H5Dclose(ds);
  }
  H5Sclose(space);
}

}  // namespace

extern "C" int LLVMFuzzerInitialize(int* argc, char*** argv) {
  MPI_Init(argc, argv);  // block reads may go through MPI-IO on MPI_COMM_SELF
  H5Eset_auto2(H5E_DEFAULT, nullptr, nullptr);
  return 0;
}

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  using namespace spinflip::ingest;
  FuzzedDataProvider in(data, size);
  const std::string path = "/tmp/spinflip-fuzz-" + std::to_string(::getpid()) + ".h5";
  {
    const hid_t f = H5Fcreate(path.c_str(), H5F_ACC_TRUNC, H5P_DEFAULT, H5P_DEFAULT);
    if (f < 0) return 0;
    const char* names[] = {"delta_tb_mK", "freq_MHz", "other", "group/delta_tb_mK"};
    const int n_sets = in.ConsumeIntegralInRange(0, 3);
    for (int i = 0; i < n_sets; ++i) {
      const std::string name = names[in.ConsumeIntegralInRange<std::size_t>(0, std::size(names) - 1)];
      if (name.find('/') != std::string::npos && H5Lexists(f, "group", H5P_DEFAULT) <= 0)
        H5Gclose(H5Gcreate2(f, "group", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT));
      if (H5Lexists(f, name.c_str(), H5P_DEFAULT) > 0) continue;
      write_dataset(f, name, in);
    }
    H5Fclose(f);
  }
  Layout layout;
  layout.format = Format::hdf5;
  if (in.ConsumeBool()) layout.dataset = "group/delta_tb_mK";
  if (in.ConsumeBool()) layout.los_dataset = "freq_MHz";
  else layout.los_start = in.ConsumeFloatingPointInRange<double>(-10, 300), layout.los_step = in.ConsumeFloatingPointInRange<double>(-1, 1);
  const int perm = in.ConsumeIntegralInRange(0, 5);
  const std::array<std::array<int, 3>, 6> perms{{{0, 1, 2}, {0, 2, 1}, {1, 0, 2}, {1, 2, 0}, {2, 0, 1}, {2, 1, 0}}};
  layout.file_axis = perms[static_cast<std::size_t>(perm)];
  spinflip::fuzz::expect_clean_refusal([&] {
    const auto h = detail::open_header(path, layout);
    (void)detail::los_coordinates(path, h, layout);
    (void)detail::scan_nonfinite(path, h, layout);
    const std::size_t nx = h.shape[static_cast<std::size_t>(layout.file_axis[0])],
                      nj = h.shape[static_cast<std::size_t>(layout.file_axis[2])];
    (void)detail::read_block(path, h, layout, 0, nx, 0, nj, MPI_COMM_SELF);
  });
  return 0;
}
