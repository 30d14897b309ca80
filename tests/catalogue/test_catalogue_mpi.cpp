// The catalogue writer at 1, 2 and 4 ranks: collective creation, rows written
// by whichever rank computed them, resume identity, refusals.
#include <gtest/gtest.h>
#include <mpi.h>
#include <unistd.h>

#include <cmath>
#include <filesystem>
#include <string>

#include "catalogue/catalogue.hpp"
#include "core/checksum.hpp"
#include "core/errors.hpp"
#include "sample_layout.hpp"

namespace fs = std::filesystem;
using namespace spinflip;
using namespace spinflip::catalogue;
using spinflip::catalogue::testing::sample_layout;
using spinflip::catalogue::testing::sample_result;
using spinflip::catalogue::testing::sample_value;

namespace {

int rank() {
  int r = 0;
  MPI_Comm_rank(MPI_COMM_WORLD, &r);
  return r;
}
int size() {
  int s = 1;
  MPI_Comm_size(MPI_COMM_WORLD, &s);
  return s;
}

/// A fresh folder every rank agrees on (rank 0 makes it).
fs::path shared_dir(const std::string& tag) {
  char buf[256] = {};
  if (rank() == 0) {
    std::string tmpl = (fs::temp_directory_path() / ("spinflip-cat-" + tag + "-XXXXXX")).string();
    std::snprintf(buf, sizeof buf, "%s", mkdtemp(tmpl.data()));
  }
  MPI_Bcast(buf, sizeof buf, MPI_CHAR, 0, MPI_COMM_WORLD);
  return buf;
}

void cleanup(const fs::path& dir) {
  MPI_Barrier(MPI_COMM_WORLD);
  if (rank() == 0) fs::remove_all(dir);
}

}  // namespace

TEST(CatalogueMpi, RowsFromEveryRankLandWhereTheyBelong) {
  fs::path dir = shared_dir("rows");
  fs::path file = dir / "cat.h5";
  Layout L = sample_layout();
  {
    Catalogue cat = Catalogue::create(file, L, MPI_COMM_WORLD);
    EXPECT_EQ(cat.n_entries(), 9u);
    for (auto s : cat.statuses()) EXPECT_EQ(s, Status::pending);
    // Entries dealt round-robin, in reverse so that no rank writes in file order;
    // entry 4 fails, entry 7 is never written (an interrupted run).
    for (std::size_t e = 9; e-- > 0;) {
      if (static_cast<int>(e % static_cast<std::size_t>(size())) != rank() || e == 7) continue;
      if (e == 4)
        cat.write_failure(e, "ModelError: ionizing_efficiency = 1e9 is outside the model's range", 0.1, rank());
      else
        cat.write_entry(e, sample_result(L, e, rank()));
    }
    MPI_Barrier(MPI_COMM_WORLD);
    auto st = cat.statuses();
    EXPECT_EQ(st[4], Status::failed);
    EXPECT_EQ(st[7], Status::pending);
    EXPECT_EQ(st[8], Status::done);
    cat.close();
  }
  if (rank() == 0) {
    Summary s = summarise(file);
    EXPECT_EQ(s.n_entries, 9u);
    EXPECT_EQ(s.done, 7u);
    EXPECT_EQ(s.failed, 1u);
    EXPECT_EQ(s.pending, 1u);
    EXPECT_FALSE(s.complete());
    ASSERT_EQ(s.failures.size(), 1u);
    EXPECT_EQ(s.failures[0].entry, 4u);
    EXPECT_EQ(s.failures[0].point, 1);
    EXPECT_EQ(s.failures[0].realisation, 1);
    EXPECT_NE(s.failures[0].message.find("outside the model's range"), std::string::npos);
    ASSERT_EQ(s.designs.size(), 2u);  // design 0: fiducial (entries 0-2), design 1: stencil (3-8)
    EXPECT_EQ(s.designs[0].done, 3u);
    EXPECT_EQ(s.designs[1].done, 4u);
    EXPECT_EQ(s.designs[1].name, "stencil");
    EXPECT_EQ(s.designs[1].failed, 1u);
    EXPECT_EQ(s.designs[1].pending, 1u);
    ASSERT_EQ(s.kernels.size(), 3u);
    EXPECT_EQ(s.kernels[1].kernel, "one_point");
    EXPECT_EQ(s.kernels[1].n_units, 3u);
    EXPECT_EQ(s.kernels[1].unit_kind, "slice");
    // Exact round trip: every value is a small binary fraction.
    auto v = read_values(file, "noisy", "power", 5);
    ASSERT_EQ(v.size(), 8u);
    for (std::size_t i = 0; i < v.size(); ++i) EXPECT_EQ(v[i], sample_value(5, 1, 0, i));
    auto pending = read_values(file, "clean", "one_point", 7);
    for (double x : pending) EXPECT_TRUE(std::isnan(x));  // NaN until done (docs/catalogue.md)
    EXPECT_THROW(read_values(file, "clean", "bispectrum", 0), InputError);
  }
  cleanup(dir);
}

TEST(CatalogueMpi, ResumeKeepsStatusesAndRefusesAnotherCampaign) {
  fs::path dir = shared_dir("resume");
  fs::path file = dir / "cat.h5";
  Layout L = sample_layout();
  {
    Catalogue cat = Catalogue::create(file, L, MPI_COMM_WORLD);
    if (rank() == size() - 1) cat.write_entry(2, sample_result(L, 2, rank()));
    cat.close();
  }
  {
    Catalogue cat = Catalogue::open(file, L, MPI_COMM_WORLD);
    auto st = cat.statuses();
    EXPECT_EQ(st[2], Status::done);
    EXPECT_EQ(st[3], Status::pending);
    // While a run holds the catalogue, a second run is refused.
    EXPECT_THROW(Catalogue::open(file, L, MPI_COMM_WORLD), IoError);
    cat.close();
  }
  std::string before;
  if (rank() == 0) before = core::sha256_file(file);
  Layout other = sample_layout(std::string(64, 'b'));
  EXPECT_THROW(Catalogue::open(file, other, MPI_COMM_WORLD), ConfigError);
  EXPECT_THROW(Catalogue::create(file, L, MPI_COMM_WORLD), IoError);  // exists: never overwritten
  MPI_Barrier(MPI_COMM_WORLD);
  if (rank() == 0) {
    EXPECT_EQ(core::sha256_file(file), before);  // refused means untouched
  }
  cleanup(dir);
}

TEST(CatalogueMpi, UnwritablePlacesAreIoErrors) {
  EXPECT_THROW(Catalogue::create("/nonexistent-spinflip-dir/cat.h5", sample_layout(), MPI_COMM_WORLD), IoError);
  EXPECT_THROW(Catalogue::open("/nonexistent-spinflip-dir/cat.h5", sample_layout(), MPI_COMM_WORLD), IoError);
  fs::path dir = shared_dir("notcat");
  if (rank() == 0) {
    FILE* f = std::fopen((dir / "x.h5").c_str(), "w");
    std::fputs("not hdf5", f);
    std::fclose(f);
  }
  MPI_Barrier(MPI_COMM_WORLD);
  EXPECT_THROW(Catalogue::open(dir / "x.h5", sample_layout(), MPI_COMM_WORLD), IoError);
  if (rank() == 0) {
    EXPECT_THROW(summarise(dir / "x.h5"), IoError);
  }
  cleanup(dir);
}

TEST(CatalogueMpi, LongErrorTextIsCutAtACharacterBoundary) {
  fs::path dir = shared_dir("err");
  fs::path file = dir / "cat.h5";
  Layout L = sample_layout();
  std::string message;
  for (int i = 0; i < 200; ++i) message += "δ";  // 2 bytes each: 400 bytes
  {
    Catalogue cat = Catalogue::create(file, L, MPI_COMM_WORLD);
    if (rank() == 0) cat.write_failure(0, message, 0, 0);
    cat.close();
  }
  if (rank() == 0) {
    Summary s = summarise(file);
    ASSERT_EQ(s.failures.size(), 1u);
    EXPECT_EQ(s.failures[0].message.size(), 254u);  // 255 would split a δ
    EXPECT_EQ(s.failures[0].message, message.substr(0, 254));
  }
  cleanup(dir);
}
