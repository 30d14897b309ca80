// A small catalogue layout and a formula for its rows, shared by the MPI test
// and the sample writer that the h5py check reads.
#pragma once
#include <cmath>
#include <string>

#include "catalogue/catalogue.hpp"

namespace spinflip::catalogue::testing {

inline Layout sample_layout(const std::string& sha = std::string(64, 'a')) {
  Layout L;
  L.campaign_sha256 = sha;
  L.campaign_text = "[campaign]\nname = \"sample\"\n";
  L.campaign_file = "sample.toml";
  L.attributes = {{"campaign_name", std::string("sample")}};
  L.parameters = {{"zeta", "", true, 10, 100, 30}, {"r_mfp", "Mpc", false, 5, 50, 20}};
  L.design_names = {"fiducial", "stencil"};
  L.points = {{{30, 20}, "fiducial", 0, -1, -1, 0, 0},
              {{31.5, 20}, "stencil+", 1, 0, 0, 1.5, 0},
              {{28.5, 20}, "stencil-", 1, 0, 0, -1.5, 0}};
  for (std::int64_t p = 0; p < 3; ++p)
    for (std::int64_t r = 0; r < 3; ++r) L.entries.push_back({p, r, {7, 0, static_cast<std::uint64_t>(r)}});
  L.history_z = {6, 7, 8, 9, 10};
  KernelLayout power{"power", "chunk", 4, {}, {150, 130}, {8.47, 9.93}, {{"bins", std::int64_t{4}}}};
  power.axes = {{"k_lo", std::vector<double>{0.1, 0.2, 0.4, 0.8}}, {"n_modes", std::vector<std::int64_t>{6, 20, 80, 300}}};
  KernelLayout moments{"one_point", "slice", 2, {}, {160, 150, 140}, {7.88, 8.47, 9.15}, {}};
  moments.axes = {{"moment", std::vector<std::int64_t>{1, 2}}};
  L.scenarios = {{"clean", {{"noise", std::int64_t{0}}}, {power, moments}},
                 {"noisy", {{"noise", std::int64_t{1}}, {"hours", 1000.0}}, {power}}};
  return L;
}

/// The value a test writes at (entry, scenario, kernel, flat index).
inline double sample_value(std::size_t e, std::size_t s, std::size_t k, std::size_t i) {
  return 1000.0 * static_cast<double>(e) + 100.0 * static_cast<double>(s) + 10.0 * static_cast<double>(k) +
         static_cast<double>(i) + 0.25;
}

inline EntryResult sample_result(const Layout& L, std::size_t e, int rank) {
  EntryResult r;
  for (std::size_t z = 0; z < L.history_z.size(); ++z) {
    r.x_hi.push_back(1.0 / (1.0 + static_cast<double>(e + z)));
    r.mean_tb_mK.push_back(20.0 + static_cast<double>(e) + 0.5 * static_cast<double>(z));
  }
  for (std::size_t s = 0; s < L.scenarios.size(); ++s) {
    auto& row = r.values.emplace_back();
    for (std::size_t k = 0; k < L.scenarios[s].kernels.size(); ++k) {
      const auto& K = L.scenarios[s].kernels[k];
      auto& v = row.emplace_back();
      for (std::size_t i = 0; i < K.unit_z.size() * K.n_coeff; ++i) v.push_back(sample_value(e, s, k, i));
    }
  }
  r.wall_time_s = 0.5;
  r.rank = rank;
  return r;
}

}  // namespace spinflip::catalogue::testing
