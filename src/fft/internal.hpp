// Shared by fft.cpp and planning.cpp only: the planner lock and its state.
#pragma once
#include <cstddef>
#include <mutex>
#include <string>
#include <vector>

#include "fft/planning.hpp"

namespace spinflip::fft::detail {
struct State {
  Planning planning;
  bool wisdom_only = false;
  std::size_t epoch = 0;
  std::vector<PlanRecord> records;
};
/// The FFTW planner (and plan destruction) is not thread-safe; execution is.
/// Recursive: a plan handle may be released while the planner holds the lock.
std::recursive_mutex& planner_mutex();
State& state();
void ensure_mpi_init();
void forget_cached_plans();
/// FFTW's flag for a rigor, and the word plan records use for it.
unsigned rigor_flag(Rigor r);
const char* rigor_name(Rigor r);
/// Append a plan record (call with the planner lock held).
void record(std::string problem, double seconds, std::string how);
}  // namespace spinflip::fft::detail
