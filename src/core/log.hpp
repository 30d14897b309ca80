// Rank-aware logging on spdlog. Rank 0 logs at info, other ranks at warn
// unless verbose; every line carries a timestamp and the rank tag.
#pragma once
#include <spdlog/spdlog.h>

#include <string>

namespace spinflip::log {

enum class Verbosity { quiet, normal, verbose };

/// Configure the process-wide logger. Safe to call again (e.g. after MPI_Init
/// tells the rank). SPINFLIP_LOG_LEVEL (trace..off) overrides the level.
void init(int rank, int n_ranks, Verbosity verbosity);

/// The logger. Logging never throws (spdlog swallows formatting errors).
spdlog::logger& get();

template <class... Args>
void info(spdlog::format_string_t<Args...> fmt, Args&&... args) {
  get().info(fmt, std::forward<Args>(args)...);
}
template <class... Args>
void warn(spdlog::format_string_t<Args...> fmt, Args&&... args) {
  get().warn(fmt, std::forward<Args>(args)...);
}
template <class... Args>
void debug(spdlog::format_string_t<Args...> fmt, Args&&... args) {
  get().debug(fmt, std::forward<Args>(args)...);
}
template <class... Args>
void error(spdlog::format_string_t<Args...> fmt, Args&&... args) {
  get().error(fmt, std::forward<Args>(args)...);
}

}  // namespace spinflip::log
