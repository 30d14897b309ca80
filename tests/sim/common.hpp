// What the light-cone tests share: a small cone and an entry key.
#pragma once
#include "core/rng.hpp"
#include "sim/lightcone.hpp"

namespace spinflip::test_support {
/// 32 × 32 × 128 cells of 3 Mpc from z = 7 to 8, 12 radii up to 20 Mpc.
inline sim::ConeSettings small_cone() {
  sim::ConeSettings s;
  s.n_perp = 32;
  s.n_los = 128;
  s.cell_mpc = 3.0;
  s.z_min = 7.0;
  s.z_max = 8.0;
  s.bubble_radius_max_mpc = 20.0;
  s.n_radii = 12;
  return s;
}

inline const rng::EntryKey small_cone_key{.campaign_seed = 11, .point = 3, .realisation = 5};
}  // namespace spinflip::test_support
