#include "core/log.hpp"

#include <spdlog/sinks/stdout_sinks.h>

#include <cstdlib>
#include <memory>

namespace spinflip::log {
namespace {
std::shared_ptr<spdlog::logger>& logger_slot() {
  static std::shared_ptr<spdlog::logger> logger;
  return logger;
}
}  // namespace

void init(int rank, int n_ranks, Verbosity verbosity) {
  // stderr, one sink per process; spdlog's stdout sinks write whole lines,
  // so lines from different ranks do not interleave mid-line.
  auto sink = std::make_shared<spdlog::sinks::stderr_sink_mt>();
  auto logger = std::make_shared<spdlog::logger>("spinflip", sink);
  std::string tag = n_ranks > 1 ? "r" + std::to_string(rank) : "spinflip";
  logger->set_pattern("[%Y-%m-%d %H:%M:%S.%e] [" + tag + "] [%l] %v");
  spdlog::level::level_enum level = spdlog::level::info;
  if (verbosity == Verbosity::quiet) level = spdlog::level::warn;
  if (verbosity == Verbosity::verbose) level = spdlog::level::debug;
  if (rank != 0 && verbosity != Verbosity::verbose) level = spdlog::level::warn;
  if (const char* env = std::getenv("SPINFLIP_LOG_LEVEL")) {
    auto parsed = spdlog::level::from_str(env);
    if (parsed != spdlog::level::off || std::string(env) == "off") level = parsed;
  }
  logger->set_level(level);
  logger->flush_on(spdlog::level::info);
  logger_slot() = logger;
}

spdlog::logger& get() {
  auto& slot = logger_slot();
  if (!slot) init(0, 1, Verbosity::normal);
  return *slot;
}

}  // namespace spinflip::log
