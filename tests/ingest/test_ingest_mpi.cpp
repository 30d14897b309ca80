// Reading cones by slab (run at 1 and 2 ranks; the group is MPI_COMM_WORLD):
// slab offsets, slabs assembling to the serial read, .npy C/Fortran order,
// a transposed axis order, HDF5 (chunked float64 in K on a frequency axis),
// and resampling of a smooth field given on a non-uniform frequency axis.
#include <gtest/gtest.h>
#include <hdf5.h>
#include <mpi.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <numbers>

#include "common.hpp"
#include "core/checksum.hpp"
#include "core/errors.hpp"

using namespace spinflip;
using namespace spinflip::ingest;

namespace {

int rank_of(MPI_Comm c) {
  int r = 0;
  MPI_Comm_rank(c, &r);
  return r;
}
int size_of(MPI_Comm c) {
  int n = 1;
  MPI_Comm_size(c, &n);
  return n;
}

/// One scratch directory for the whole group (rank 0 makes it).
std::filesystem::path shared_scratch(const std::string& name) {
  std::string path;
  if (rank_of(MPI_COMM_WORLD) == 0) path = test::scratch(name).string();
  int n = static_cast<int>(path.size());
  MPI_Bcast(&n, 1, MPI_INT, 0, MPI_COMM_WORLD);
  path.resize(static_cast<std::size_t>(n));
  MPI_Bcast(path.data(), n, MPI_CHAR, 0, MPI_COMM_WORLD);
  return path;
}

/// Serial HDF5 writer for the test files (chunked, float64, in K).
void write_h5(const std::filesystem::path& file, const std::vector<std::size_t>& shape, const std::vector<double>& v,
              const std::vector<double>& freq) {
  hid_t f = H5Fcreate(file.c_str(), H5F_ACC_TRUNC, H5P_DEFAULT, H5P_DEFAULT);
  hid_t g = H5Gcreate2(f, "sim", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
  std::vector<hsize_t> dims(shape.begin(), shape.end()), chunk{3, 5, 7};  // chunks straddle every slab edge
  hid_t space = H5Screate_simple(3, dims.data(), nullptr);
  hid_t dcpl = H5Pcreate(H5P_DATASET_CREATE);
  H5Pset_chunk(dcpl, 3, chunk.data());
  hid_t d = H5Dcreate2(g, "tb_K", H5T_IEEE_F64LE, space, H5P_DEFAULT, dcpl, H5P_DEFAULT);
  H5Dwrite(d, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, v.data());
  const hsize_t nf = freq.size();
  hid_t fs = H5Screate_simple(1, &nf, nullptr);
  hid_t fd = H5Dcreate2(g, "freq_MHz", H5T_IEEE_F64LE, fs, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
  H5Dwrite(fd, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, freq.data());
  H5Dclose(fd), H5Sclose(fs), H5Dclose(d), H5Pclose(dcpl), H5Sclose(space), H5Gclose(g), H5Fclose(f);
}

Manifest one_row(const std::filesystem::path& file, const Layout& layout) {
  Manifest m;
  m.param_names = {"ionizing_efficiency"};
  m.layout = layout;
  m.rows.push_back({.file = file, .values = {30.0}, .realisation = 0, .role = "list", .where = "test"});
  return m;
}

double max_rel_diff(const std::vector<float>& a, const std::vector<float>& b) {
  double scale = 0, diff = 0;
  for (std::size_t i = 0; i < a.size(); ++i) {
    scale = std::max(scale, std::abs(static_cast<double>(b[i])));
    diff = std::max(diff, std::abs(static_cast<double>(a[i]) - b[i]));
  }
  EXPECT_GT(scale, 0.0);
  return diff / scale;
}

/// A generated cone (same on every rank: MPI_COMM_SELF) written to .npy (C,
/// Fortran, transposed) and HDF5; every read through a group gives the
/// generator's values on the right slab.
TEST(IngestMpi, SlabsOffsetsAndAssembly) {
  const MPI_Comm world = MPI_COMM_WORLD;
  const auto dir = shared_scratch("mpi-slabs");
  const cosmo::Cosmology c;
  auto s = test::small_settings();
  s.z_min = 9.0, s.z_max = 9.2;  // partly neutral: a cone with structure, not zeros
  const auto t = target_from(s, c);
  const std::size_t n = t.n_perp, nl = t.n_los;
  const rng::EntryKey key{.campaign_seed = 5, .point = 1, .realisation = 2};
  const auto serial = sim::generate_cone(s, c, key, MPI_COMM_SELF);
  ASSERT_EQ(serial.distance_mpc, t.distance_mpc);  // target_from is the generator's grid
  const auto& v = serial.delta_tb_mK.data;
  if (rank_of(world) == 0) {
    test::write_npy((dir / "c.npy").string(), {n, n, nl}, v);
    std::vector<float> f(v.size()), los_first(v.size());
    std::vector<double> kelvin(v.size());
    for (std::size_t i = 0; i < n; ++i)
      for (std::size_t j = 0; j < n; ++j)
        for (std::size_t k = 0; k < nl; ++k) {
          const float x = v[(i * n + j) * nl + k];
          f[i + n * (j + n * k)] = x;             // Fortran order: first index fastest
          los_first[(k * n + i) * n + j] = x;     // axis order (los, x, y)
          kelvin[(i * n + j) * nl + k] = x / 1000.0;
        }
    test::write_npy((dir / "f.npy").string(), {n, n, nl}, f, true);
    test::write_npy((dir / "t.npy").string(), {nl, n, n}, los_first);
    write_h5(dir / "cone.h5", {n, n, nl}, kelvin, serial.freq_MHz);
  }
  MPI_Barrier(world);

  // The slab is the generator's slab for the same group.
  const auto grouped = sim::generate_cone(s, c, key, world);
  const auto [start, count] = slab_of(n, world);
  EXPECT_EQ(start, grouped.local_start0);
  EXPECT_EQ(count, grouped.local_n0);
  // Slabs tile axis 0: rank r starts where rank r-1 ends.
  std::vector<unsigned long> all(2 * static_cast<std::size_t>(size_of(world)));
  const unsigned long mine[2] = {start, count};
  MPI_Allgather(mine, 2, MPI_UNSIGNED_LONG, all.data(), 2, MPI_UNSIGNED_LONG, world);
  std::size_t next = 0;
  for (int r = 0; r < size_of(world); ++r) {
    EXPECT_EQ(all[2 * r], next) << "rank " << r;
    next += all[2 * r + 1];
  }
  EXPECT_EQ(next, n);
  if (size_of(world) == 2) {
    EXPECT_EQ(all[1], n / 2);  // FFTW-MPI blocks of ceil(n/P) (from memory)
  }

  Layout npy = test::distance_layout(t);
  Layout transposed = npy;
  transposed.file_axis = {1, 2, 0};  // axis_order = ["los", "x", "y"]
  Layout h5;
  h5.format = Format::hdf5;
  h5.dataset = "/sim/tb_K";
  h5.to_mK = 1000.0;
  h5.los = LosCoordinate::frequency_MHz;
  h5.los_dataset = "sim/freq_MHz";
  struct Case {
    std::string name;
    std::filesystem::path file;
    Layout layout;
    double tol;  // relative to the largest |δT_b|
  };
  // Same grid, exact copies: only float rounding. HDF5: K → mK scaling and
  // the frequency → distance round trip (weights ~1e-9 off 0/1): 1e-6 as asked.
  const std::vector<Case> cases{{"npy C", dir / "c.npy", npy, 1e-7},
                                {"npy Fortran", dir / "f.npy", npy, 1e-7},
                                {"transposed", dir / "t.npy", transposed, 1e-7},
                                {"hdf5", dir / "cone.h5", h5, 1e-6}};
  for (const auto& cs : cases) {
    SCOPED_TRACE(cs.name);
    const auto m = one_row(cs.file, cs.layout);
    ASSERT_TRUE(check_all(m, t, c, true).empty()) << check_all(m, t, c, true).front();
    const auto got = read_cone(m, 0, t, c, world);
    EXPECT_EQ(got.cone.local_start0, start);
    EXPECT_EQ(got.cone.local_n0, count);
    EXPECT_EQ(got.cone.global_shape, (std::array<std::size_t, 3>{n, n, nl}));
    // The slab holds rows [start, start + count) of the serial cone.
    std::vector<float> expect(v.begin() + static_cast<long>(start * n * nl),
                              v.begin() + static_cast<long>((start + count) * n * nl));
    if (count > 0) {
      const double rel = max_rel_diff(got.cone.delta_tb_mK.data, expect);
      EXPECT_LE(rel, cs.tol);
      if (rank_of(world) == 0) std::printf("  %s: max relative difference %.3g (allowed %.0e)\n", cs.name.c_str(), rel, cs.tol);
    }
    // Slabs assemble to the serial read bit for bit.
    const auto whole = sim::allgather_cone(got.cone, world);
    const auto alone = read_cone(m, 0, t, c, MPI_COMM_SELF);
    EXPECT_EQ(whole.data, alone.cone.delta_tb_mK.data);
    EXPECT_EQ(got.sha256, core::sha256_file(cs.file));  // sha256sum of the file, on every rank
    for (std::size_t k = 0; k < nl; k += 7)
      EXPECT_NEAR(got.cone.tb_mean_mK[k], serial.tb_mean_mK[k], 1e-4 * std::abs(serial.tb_mean_mK[k]) + 1e-6);
  }
}

/// A smooth field A sin(q D + φ) + B given on slices non-uniform in frequency
/// (raw float32, coordinates in the sidecar), resampled onto the campaign grid.
/// Linear interpolation errs by at most h²/8 · max|f''| = A q² h² / 8 for slice
/// spacing h (Burden & Faires, Numerical Analysis, Thm 3.3 with n = 1; from
/// memory), plus float32 storage of the values (2⁻²⁴ relative, twice).
TEST(IngestMpi, NonUniformFrequencyAxisResampling) {
  const MPI_Comm world = MPI_COMM_WORLD;
  const auto dir = shared_scratch("mpi-resample");
  const cosmo::Cosmology c;
  const auto t = target_from(test::small_settings(), c);
  const std::size_t n = t.n_perp, nl = t.n_los, L = 61;
  const double A = 4.0, B = 20.0, q = 2.0 * std::numbers::pi / 30.0;  // 30 Mpc wavelength
  // Frequencies from above the near end to below the far end, denser at high ν.
  const double nu_hi = cosmo::frequency_MHz(6.98), nu_lo = cosmo::frequency_MHz(t.z.back() + 0.03);
  std::vector<double> nu(L), dist(L);
  for (std::size_t j = 0; j < L; ++j) {
    const double u = static_cast<double>(j) / static_cast<double>(L - 1);
    nu[j] = nu_hi - (nu_hi - nu_lo) * std::pow(u, 1.4);
    dist[j] = c.comoving_distance_mpc(cosmo::redshift_at_frequency(nu[j]));
  }
  double h = 0;
  for (std::size_t j = 1; j < L; ++j) h = std::max(h, dist[j] - dist[j - 1]);
  auto phase = [](std::size_t i, std::size_t j) { return 0.4 * static_cast<double>(i) + 0.9 * static_cast<double>(j); };
  if (rank_of(world) == 0) {
    std::vector<float> v(n * n * L);
    for (std::size_t i = 0; i < n; ++i)
      for (std::size_t j = 0; j < n; ++j)
        for (std::size_t k = 0; k < L; ++k)
          v[(i * n + j) * L + k] = static_cast<float>(A * std::sin(q * dist[k] + phase(i, j)) + B);
    std::ofstream(dir / "cone.f32", std::ios::binary)
        .write(reinterpret_cast<const char*>(v.data()), static_cast<std::streamsize>(v.size() * 4));
    std::string side = "shape = [" + std::to_string(n) + ", " + std::to_string(n) + ", " + std::to_string(L) +
                       "]\nlos_values = [";
    char buf[40];
    for (std::size_t k = 0; k < L; ++k) {
      std::snprintf(buf, sizeof buf, "%.17g", nu[k]);
      side += (k ? ", " : "") + std::string(buf);
    }
    test::write_text(dir / "cone.f32.toml", side + "]\n");
  }
  MPI_Barrier(world);
  Layout l;
  l.format = Format::raw;
  l.los = LosCoordinate::frequency_MHz;
  const auto m = one_row(dir / "cone.f32", l);
  ASSERT_TRUE(check_all(m, t, c, false).empty()) << check_all(m, t, c, false).front();
  const auto got = read_cone(m, 0, t, c, world);
  const double bound = A * q * q * h * h / 8.0 + 2.0 * (A + B) * std::pow(2.0, -24);
  double worst = 0;
  for (std::size_t i = 0; i < got.cone.local_n0; ++i)
    for (std::size_t j = 0; j < n; ++j)
      for (std::size_t k = 0; k < nl; ++k) {
        const double exact = A * std::sin(q * t.distance_mpc[k] + phase(got.cone.local_start0 + i, j)) + B;
        worst = std::max(worst, std::abs(got.cone.delta_tb_mK(i, j, k) - exact));
      }
  EXPECT_LE(worst, bound) << "slice spacing up to " << h << " Mpc";
  if (rank_of(world) == 0)
    std::printf("  resampling: worst error %.4g mK, bound %.4g mK (h = %.3g Mpc)\n", worst, bound, h);
  // The bound is not vacuous: the field does vary by far more between slices.
  EXPECT_GT(A * q * h, 10.0 * bound);
  if (got.cone.local_n0 > 0) {
    EXPECT_GT(worst, 0.0);
  }
  // A band not covered is refused, not padded.
  Manifest shorter = m;
  shorter.layout.los = LosCoordinate::frequency_MHz;
  const auto tb = target_from([] {
    auto s = test::small_settings();
    s.z_min = 6.9;  // the near end now lies beyond the file's highest frequency
    return s;
  }(), c);
  EXPECT_THROW(read_cone(shorter, 0, tb, c, world), InputError);
}

}  // namespace
