#include "sim/initial_conditions.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <vector>

#include "core/array.hpp"
#include "cosmo/cosmology.hpp"

namespace spinflip::sim::detail {

double wavenumber(std::size_t i, std::size_t n, double cell_mpc) {
  return 2.0 * std::numbers::pi * static_cast<double>(core::fft_index(i, n)) /
         (static_cast<double>(n) * cell_mpc);
}

void draw_white_noise(fft::SlabField& field, const rng::EntryKey& key) {
  const auto& n = field.global_shape();
  const std::size_t n0 = field.local_n0(), start = field.local_start0(), pad = field.padded_n2();
  const rng::CounterRng rng(key, rng::Stream::initial_conditions);

  // Unit white noise: cell g takes normal number g mod 2 of pair g / 2.
  float* r = field.real_data();
  for (std::size_t i = 0; i < n0; ++i)
    for (std::size_t j = 0; j < n[1]; ++j) {
      const std::uint64_t row = ((start + i) * n[1] + j) * n[2];
      float* line = r + (i * n[1] + j) * pad;
      std::size_t k = 0;
      if (row % 2 == 1) {  // odd row start (odd n2): first cell is the second of a pair
        line[0] = static_cast<float>(rng.normal_pair(row / 2)[1]);
        k = 1;
      }
      for (; k + 1 < n[2]; k += 2) {
        auto p = rng.normal_pair((row + k) / 2);
        line[k] = static_cast<float>(p[0]);
        line[k + 1] = static_cast<float>(p[1]);
      }
      if (k < n[2]) line[k] = static_cast<float>(rng.normal_pair((row + k) / 2)[0]);
    }
}

void draw_linear_density(fft::SlabField& field, double cell_mpc, const cosmo::Cosmology& c,
                         const rng::EntryKey& key) {
  const auto& n = field.global_shape();
  const std::size_t n0 = field.local_n0(), start = field.local_start0();
  draw_white_noise(field, key);
  field.forward();

  // Colour: √(P/ΔV) and the 1/N of the inverse. P from a fine log-log table (error ≲ 1e-6).
  const double n_cells = static_cast<double>(n[0]) * static_cast<double>(n[1]) * static_cast<double>(n[2]);
  const double dv = cell_mpc * cell_mpc * cell_mpc;
  const double k_lo = 0.5 * 2.0 * std::numbers::pi / (static_cast<double>(std::max({n[0], n[1], n[2]})) * cell_mpc);
  const double k_hi = 1.01 * std::sqrt(3.0) * std::numbers::pi / cell_mpc;
  const std::size_t nt = 4096;
  const double lk0 = std::log(k_lo), dlk = (std::log(k_hi) - lk0) / static_cast<double>(nt - 1);
  std::vector<double> lamp(nt);
  for (std::size_t t = 0; t < nt; ++t)
    lamp[t] = 0.5 * std::log(c.linear_power(std::exp(lk0 + dlk * static_cast<double>(t)), 0.0) / dv);
  const double inv_n = 1.0 / n_cells;

  std::vector<double> k2sq(field.half_n2());
  for (std::size_t kh = 0; kh < k2sq.size(); ++kh) {
    double k = 2.0 * std::numbers::pi * static_cast<double>(kh) / (static_cast<double>(n[2]) * cell_mpc);
    k2sq[kh] = k * k;
  }
  for (std::size_t i = 0; i < n0; ++i) {
    const double k0 = wavenumber(start + i, n[0], cell_mpc);
    for (std::size_t j = 0; j < n[1]; ++j) {
      const double k1 = wavenumber(j, n[1], cell_mpc);
      const double kp2 = k0 * k0 + k1 * k1;
      fft::cfloat* m = &field.mode(i, j, 0);
      for (std::size_t kh = 0; kh < k2sq.size(); ++kh) {
        const double kk = std::sqrt(kp2 + k2sq[kh]);
        if (kk == 0.0) {
          m[kh] = 0.0f;
          continue;
        }
        double x = (std::log(kk) - lk0) / dlk;
        x = std::clamp(x, 0.0, static_cast<double>(nt - 1));
        auto t = std::min(static_cast<std::size_t>(x), nt - 2);
        double w = x - static_cast<double>(t);
        const double amp = std::exp(lamp[t] * (1 - w) + lamp[t + 1] * w) * inv_n;
        m[kh] *= static_cast<float>(amp);
      }
    }
  }
}

}  // namespace spinflip::sim::detail
