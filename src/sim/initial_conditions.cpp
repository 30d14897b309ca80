#include "sim/initial_conditions.hpp"

#include <algorithm>
#include <array>
#include <bit>
#include <cstdint>
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

/// Box–Muller on n pairs of 32-bit words (Random123's float form: the angle from
/// uneg11(u0), the radius from u01(u1)), written interleaved: out[2i] = r sin(π x),
/// out[2i+1] = r cos(π x). ln, sin and cos are evaluated by polynomials (atanh series for
/// ln on [√½, √2); Taylor series of sin and cos on [−π/4, π/4], truncation < 2e-9) so that
/// the loop vectorizes; the clones use no FMA, so every clone gives the same bits.
__attribute__((target_clones("avx2", "default"))) void box_muller_pairs(const std::uint32_t* __restrict u0,
                                                                  const std::uint32_t* __restrict u1,
                                                                  float* __restrict out, std::size_t n) {
  for (std::size_t i = 0; i < n; ++i) {
    // u = u01(u1) in (0, 1] from the top 31 bits (the smallest is 2^-32, so |z| < 6.7);
    // x = uneg11(u0) in (−1, 1).
    const float u = static_cast<float>(static_cast<std::int32_t>(u1[i] >> 1)) * 0x1p-31f + 0x1p-32f;
    const float x = static_cast<float>(static_cast<std::int32_t>(u0[i])) * 0x1p-31f + 0x1p-32f;
    // ln u = e ln 2 + ln m, m in [√½, √2).
    const std::int32_t bits = std::bit_cast<std::int32_t>(u);
    std::int32_t e = ((bits >> 23) & 0xff) - 127;
    float m = std::bit_cast<float>((bits & 0x007fffff) | 0x3f800000);
    const bool big = m > 1.41421356f;
    m = big ? m * 0.5f : m;
    e = big ? e + 1 : e;
    const float f = m - 1.0f, s = f / (2.0f + f), s2 = s * s;
    const float ln_m = 2.0f * s * (1.0f + s2 * (1.0f / 3 + s2 * (1.0f / 5 + s2 * (1.0f / 7 + s2 * (1.0f / 9)))));
    const float ef = static_cast<float>(e);
    const float ln_u = ef * 0.693359375f + (ef * -2.12194440e-4f + ln_m);
    const float r = std::sqrt(-2.0f * ln_u);
    // sin and cos of π x: x = q/2 + t/π with q = round(2x), t in [−π/4, π/4].
    const std::int32_t q = static_cast<std::int32_t>(2.0f * x + 2.5f) - 2;
    const float t = (x - 0.5f * static_cast<float>(q)) * 3.14159265f, t2 = t * t;
    const float sn = t * (1.0f + t2 * (-1.0f / 6 + t2 * (1.0f / 120 + t2 * (-1.0f / 5040 + t2 * (1.0f / 362880)))));
    const float cs =
        1.0f + t2 * (-0.5f + t2 * (1.0f / 24 + t2 * (-1.0f / 720 + t2 * (1.0f / 40320 + t2 * (-1.0f / 3628800)))));
    const std::int32_t quad = q & 3;  // sin(t + qπ/2), cos(t + qπ/2)
    const float sin_pi_x = (quad & 1) != 0 ? cs : sn, cos_pi_x = (quad & 1) != 0 ? sn : cs;
    out[2 * i] = (quad >= 2 ? -r : r) * sin_pi_x;
    out[2 * i + 1] = (quad == 1 || quad == 2 ? -r : r) * cos_pi_x;
  }
}

void draw_white_noise(fft::SlabField& field, const rng::EntryKey& key) {
  const auto& n = field.global_shape();
  const std::size_t n0 = field.local_n0(), start = field.local_start0(), pad = field.padded_n2();
  const rng::CounterRng rng(key, rng::Stream::initial_conditions);

  // Unit white noise: cell g of the global box takes normal g mod 2 of pair g / 2, and pair p
  // comes from word p mod 4 of Philox counter p / 4 (its low half the angle, its high half the
  // radius), so a row of cells needs the pairs [row/2, (end−1)/2] whatever rank holds it.
  float* r = field.real_data();
  std::vector<std::uint32_t> lo(n[2] / 2 + 2), hi(n[2] / 2 + 2);
  std::vector<float> normals(n[2] + 4);
  for (std::size_t i = 0; i < n0; ++i)
    for (std::size_t j = 0; j < n[1]; ++j) {
      const std::uint64_t row = ((start + i) * n[1] + j) * n[2], end = row + n[2];
      const std::uint64_t p0 = row / 2, p1 = (end - 1) / 2;
      std::array<std::uint64_t, 4> words{};
      std::uint64_t block = ~std::uint64_t{0};
      for (std::uint64_t p = p0; p <= p1; ++p) {
        if (p / 4 != block) {
          block = p / 4;
          words = rng.bits(block);
        }
        lo[p - p0] = static_cast<std::uint32_t>(words[p % 4]);
        hi[p - p0] = static_cast<std::uint32_t>(words[p % 4] >> 32);
      }
      box_muller_pairs(lo.data(), hi.data(), normals.data(), p1 - p0 + 1);
      std::copy_n(normals.data() + (row - 2 * p0), n[2], r + (i * n[1] + j) * pad);
    }
}

void draw_linear_density(fft::SlabField& field, double cell_mpc, const cosmo::Cosmology& c,
                         const rng::EntryKey& key) {
  const auto& n = field.global_shape();
  const std::size_t n0 = field.local_n0(), start = field.local_start0();
  draw_white_noise(field, key);
  field.forward();

  // Colour: √(P/ΔV) and the 1/N of the inverse. ln √P on a fine log-log table (error ≲ 1e-6)
  // resampled to a table uniform in |k|, read by linear interpolation per mode (relative error
  // ≲ 1e-5 at the lowest box wavenumber, far less above: common practice for tabulated spectra).
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
  auto amplitude = [&](double kk) {
    double x = (std::log(kk) - lk0) / dlk;
    x = std::clamp(x, 0.0, static_cast<double>(nt - 1));
    auto t = std::min(static_cast<std::size_t>(x), nt - 2);
    double w = x - static_cast<double>(t);
    return std::exp(lamp[t] * (1 - w) + lamp[t + 1] * w) * inv_n;
  };
  const std::size_t nu = 65536;
  const double k_top = std::sqrt(3.0) * std::numbers::pi / cell_mpc * 1.0001, du = k_top / static_cast<double>(nu - 1);
  std::vector<float> amp(nu + 1);
  amp[0] = 0.0f;  // the k = 0 mode is zero (and the lowest box mode sits many nodes above)
  for (std::size_t t = 1; t <= nu; ++t) amp[t] = static_cast<float>(amplitude(du * static_cast<double>(t)));
  const double inv_du = 1.0 / du;

  const std::size_t half = field.half_n2();
  std::vector<double> k2sq(half);
  for (std::size_t kh = 0; kh < half; ++kh) {
    double k = 2.0 * std::numbers::pi * static_cast<double>(kh) / (static_cast<double>(n[2]) * cell_mpc);
    k2sq[kh] = k * k;
  }
  for (std::size_t i = 0; i < n0; ++i) {
    const double k0 = wavenumber(start + i, n[0], cell_mpc);
    for (std::size_t j = 0; j < n[1]; ++j) {
      const double k1 = wavenumber(j, n[1], cell_mpc);
      const double kp2 = k0 * k0 + k1 * k1;
      fft::cfloat* m = &field.mode(i, j, 0);
      for (std::size_t kh = 0; kh < half; ++kh) {
        const double x = std::sqrt(kp2 + k2sq[kh]) * inv_du;
        const auto t = static_cast<std::size_t>(x);
        const float w = static_cast<float>(x - static_cast<double>(t));
        m[kh] *= amp[t] + w * (amp[t + 1] - amp[t]);
      }
    }
  }
}

}  // namespace spinflip::sim::detail
