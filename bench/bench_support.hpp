// Shared by the benchmarks: a console reporter that also keeps each run's
// seconds per iteration (wall, or CPU where a shared machine's load would
// swamp wall time) by name, so a benchmark can print ratios of runs measured
// in the same invocation.
#pragma once
#include <benchmark/benchmark.h>

#include <map>
#include <string>
#include <vector>

#include "fft/planning.hpp"

namespace spinflip::bench {

class SecondsPerIteration : public benchmark::ConsoleReporter {
 public:
  enum class Clock { wall, cpu };
  explicit SecondsPerIteration(Clock clock = Clock::wall) : clock_(clock) {}
  std::map<std::string, double> seconds;
  void ReportRuns(const std::vector<Run>& runs) override {
    for (const auto& r : runs)
      if (r.run_type == Run::RT_Iteration && r.iterations > 0)
        seconds[r.benchmark_name()] =
            (clock_ == Clock::cpu ? r.cpu_accumulated_time : r.real_accumulated_time) / static_cast<double>(r.iterations);
    ConsoleReporter::ReportRuns(runs);
  }

 private:
  Clock clock_;
};

/// Plans for what follows: measured (kept as wisdom between switches), or FFTW_ESTIMATE,
/// so one run times the same work with both and the fastest plan is the denominator.
inline void use_plans(bool measured) {
  static std::string measured_wisdom;
  static bool measured_now = false;
  if (measured == measured_now) return;
  if (measured_now) measured_wisdom = fft::wisdom_text();
  measured_now = measured;
  fft::set_planning(measured ? fft::Planning{fft::Rigor::measure, 600} : fft::Planning{});
  fft::use_wisdom(measured ? measured_wisdom : std::string(), "bench");
}

}  // namespace spinflip::bench
