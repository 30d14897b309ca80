// core::run_on_root: what rank 0 throws, every rank throws, with the same class and text.
#include <gtest/gtest.h>
#include <mpi.h>

#include "core/collective.hpp"
#include "../support/mpi_helpers.hpp"

using namespace spinflip;
using test_support::world_rank;

namespace {

template <class E>
void expect_everywhere(const char* text) {
  int ran = 0;
  try {
    core::run_on_root(MPI_COMM_WORLD, [&] {
      ran = 1;
      throw E(text);
    });
    ADD_FAILURE() << "run_on_root returned although rank 0 threw";
  } catch (const E& e) {
    EXPECT_STREQ(e.what(), text);
  }
  EXPECT_EQ(ran, world_rank() == 0 ? 1 : 0);  // only rank 0 runs the work
}
}  // namespace

TEST(RunOnRoot, NothingThrownReturnsEverywhere) {
  int ran = 0;
  core::run_on_root(MPI_COMM_WORLD, [&] { ran = 1; });
  int total = 0;
  MPI_Allreduce(&ran, &total, 1, MPI_INT, MPI_SUM, MPI_COMM_WORLD);
  EXPECT_EQ(total, 1);
}

TEST(RunOnRoot, EachUserErrorKeepsItsClass) {
  expect_everywhere<ConfigError>("campaign.toml:3: cone.n_perp = -1: must be >= 2");
  expect_everywhere<InputError>("cube.npy: NaN at cell 17");
  expect_everywhere<IoError>("out.h5: disk full");
  expect_everywhere<ModelError>("ionizing_efficiency = 0.5: must be > 1");
}

TEST(RunOnRoot, OtherExceptionsBecomeInternalErrors) {
  try {
    core::run_on_root(MPI_COMM_WORLD, [] { throw std::out_of_range("map::at"); });
    ADD_FAILURE() << "no throw";
  } catch (const InternalError& e) {
    EXPECT_STREQ(e.what(), "map::at");
    EXPECT_EQ(e.exit_status(), 1);
  }
}
