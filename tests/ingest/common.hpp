// Shared pieces of the ingest tests: a scratch directory, a small campaign
// grid and file writers.
#pragma once
#include <unistd.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include "cosmo/cosmology.hpp"
#include "ingest/ingest.hpp"
#include "npy_write.hpp"
#include "sim/lightcone.hpp"

namespace spinflip::ingest::test {

/// Removes the scratch directories this process made when it exits.
struct ScratchRegistry {
  std::vector<std::filesystem::path> dirs;
  ~ScratchRegistry() {
    std::error_code ec;
    for (auto& d : dirs) std::filesystem::remove_all(d, ec);
  }
};
inline ScratchRegistry& scratch_registry() {
  static ScratchRegistry r;
  return r;
}

/// A fresh directory per test (and per process, so MPI ranks do not collide).
inline std::filesystem::path scratch(const std::string& name) {
  auto d = std::filesystem::temp_directory_path() /
           ("spinflip-ingest-" + std::to_string(::getpid()) + "-" + name);
  std::filesystem::remove_all(d);
  std::filesystem::create_directories(d);
  scratch_registry().dirs.push_back(d);
  return d;
}

inline void write_text(const std::filesystem::path& p, const std::string& text) {
  std::ofstream(p) << text;
}

/// A small campaign grid: 8 × 8 × 48 cells of 2 Mpc from z = 7.
inline sim::ConeSettings small_settings() {
  sim::ConeSettings s;
  s.n_perp = 8;
  s.n_los = 48;
  s.cell_mpc = 2.0;
  s.z_min = 7.0;
  s.z_max = 7.2;
  s.bubble_radius_max_mpc = 10.0;
  s.n_radii = 6;
  return s;
}

/// A layout for .npy files on the campaign's own distance grid.
inline Layout distance_layout(const Target& t) {
  Layout l;
  l.los = LosCoordinate::distance_mpc;
  l.los_start = t.distance_mpc.front();
  l.los_step = t.cell_mpc;
  return l;
}

/// A smooth test field in mK on the target grid, C order (x, y, los).
inline std::vector<float> smooth_field(const Target& t) {
  std::vector<float> v(t.n_perp * t.n_perp * t.n_los);
  for (std::size_t i = 0; i < t.n_perp; ++i)
    for (std::size_t j = 0; j < t.n_perp; ++j)
      for (std::size_t k = 0; k < t.n_los; ++k)
        v[(i * t.n_perp + j) * t.n_los + k] =
            static_cast<float>(10.0 + 5.0 * std::sin(0.3 * static_cast<double>(i) + 0.7 * static_cast<double>(j) + 0.05 * t.distance_mpc[k]));
  return v;
}

}  // namespace spinflip::ingest::test
