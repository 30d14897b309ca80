// The driver's assignment policy, without MPI: which entries a run takes on,
// which group sizes are allowed, and how a group splits its units.
#include <gtest/gtest.h>

#include <csignal>
#include <numeric>

#include "campaign/driver.hpp"
#include "core/errors.hpp"

using namespace spinflip;
using namespace spinflip::campaign;
using catalogue::Status;

TEST(DriverPolicy, TodoIsPendingEntriesInOrderPlusFailedOnRequest) {
  const std::vector<Status> s = {Status::done, Status::pending, Status::failed, Status::pending, Status::done};
  EXPECT_EQ(todo_entries(s, false), (std::vector<std::size_t>{1, 3}));
  EXPECT_EQ(todo_entries(s, true), (std::vector<std::size_t>{1, 2, 3}));
  EXPECT_TRUE(todo_entries({Status::done, Status::done}, true).empty());
}

TEST(DriverPolicy, GroupSizeMustDivideTheRanks) {
  EXPECT_NO_THROW(check_group_size(1, 7, "test"));
  EXPECT_NO_THROW(check_group_size(2, 4, "test"));
  EXPECT_NO_THROW(check_group_size(4, 4, "test"));
  EXPECT_THROW(check_group_size(3, 4, "test"), ConfigError);
  EXPECT_THROW(check_group_size(0, 4, "test"), ConfigError);
  EXPECT_THROW(check_group_size(8, 4, "test"), ConfigError);
  try {
    check_group_size(3, 4, "--group-size");
  } catch (const ConfigError& e) {
    const std::string m = e.what();
    EXPECT_NE(m.find("--group-size"), std::string::npos) << m;  // names where the value came from
    EXPECT_NE(m.find("does not divide the 4 MPI ranks"), std::string::npos) << m;
  }
}

TEST(DriverPolicy, UnitBlocksTileTheUnitsContiguouslyAndEvenly) {
  for (std::size_t n : {0u, 1u, 5u, 9u, 64u})
    for (int g : {1, 2, 3, 4, 7}) {
      std::size_t next = 0, smallest = n, largest = 0;
      for (int r = 0; r < g; ++r) {
        auto [b, e] = unit_block(n, r, g);
        EXPECT_EQ(b, next) << "n=" << n << " g=" << g << " r=" << r;  // contiguous, in rank order
        EXPECT_LE(b, e);
        smallest = std::min(smallest, e - b), largest = std::max(largest, e - b);
        next = e;
      }
      EXPECT_EQ(next, n);              // every unit once
      EXPECT_LE(largest - smallest, 1u);  // balanced to one unit
    }
}

TEST(DriverSignals, UsrOneThenTermKeepsTheStrongerRequest) {
  install_stop_handlers();
  reset_stop_signal();
  EXPECT_EQ(stop_signal(), 0);
  std::raise(SIGUSR1);
  EXPECT_EQ(stop_signal(), SIGUSR1);
  std::raise(SIGTERM);
  EXPECT_EQ(stop_signal(), SIGTERM);  // abandon beats finish
  std::raise(SIGUSR1);
  EXPECT_EQ(stop_signal(), SIGTERM);
  reset_stop_signal();
}

TEST(DriverSignals, CtrlCIsACleanStopThatAbandonsTheEntry) {
  // Issue 19: SIGINT is caught like SIGTERM (the entry in progress is abandoned,
  // the run stops resumably) instead of ending the process.
  install_stop_handlers();
  reset_stop_signal();
  std::raise(SIGUSR1);
  std::raise(SIGINT);
  EXPECT_EQ(stop_signal(), SIGINT);  // abandon beats finish
  EXPECT_TRUE(abandons_entry(SIGINT));
  EXPECT_TRUE(abandons_entry(SIGTERM));
  EXPECT_FALSE(abandons_entry(SIGUSR1));
  EXPECT_EQ(signal_name(SIGINT), "SIGINT");
  EXPECT_EQ(signal_name(SIGUSR1), "SIGUSR1");
  EXPECT_EQ(exit_stopped, 3);  // docs/driver.md: the status of a signal stop
  reset_stop_signal();  // (a second SIGINT would end the test process: not raised here)
}
