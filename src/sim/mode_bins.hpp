// Internal: |k| of every local mode of a slab field binned for table-driven
// isotropic filters (top hats, shells), shared by the excursion set and the
// spin-temperature shells.
#pragma once
#if defined(__SSE2__)
#include <emmintrin.h>
#endif
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <numbers>
#include <vector>

#include "fft/fft.hpp"
#include "sim/initial_conditions.hpp"

namespace spinflip::sim::detail {

/// Top-hat window in Fourier space (common practice), from sin x and cos x.
inline double top_hat(double x, double sin_x, double cos_x) {
  return x < 1e-3 ? 1.0 - x * x / 10.0 : 3.0 * (sin_x - x * cos_x) / (x * x * x);
}

/// |k| of every local mode rounded to one of 65536 bins (2 bytes per mode): a radius's window is
/// then a table of 65536 gains, and smoothing is a gather and a multiply per mode. The bin width
/// is k_max/65535, so kR is off by at most k_max R/131070 (≤ 1e-3 for R ≤ 40 cells).
struct ModeBins {
  static constexpr std::size_t n_bins = 65536;
  double dk = 1;
  std::vector<std::uint16_t> bin;
  ModeBins(const fft::SlabField& f, double cell_mpc) {
    const auto& n = f.global_shape();
    const double pi = std::numbers::pi;
    const double k_top = std::sqrt(3.0) * pi / cell_mpc * 1.0001;
    dk = k_top / static_cast<double>(n_bins - 1);
    const std::size_t half = f.half_n2();
    std::vector<double> kz2(half);
    for (std::size_t kh = 0; kh < half; ++kh) {
      const double k2 = 2.0 * pi * static_cast<double>(kh) / (static_cast<double>(n[2]) * cell_mpc);
      kz2[kh] = k2 * k2;
    }
    bin.resize(f.local_n0() * n[1] * half);
    const double inv_dk = 1.0 / dk;
    for (std::size_t i = 0; i < f.local_n0(); ++i) {
      const double k0 = detail::wavenumber(f.local_start0() + i, n[0], cell_mpc);
      for (std::size_t j = 0; j < n[1]; ++j) {
        const double k1 = detail::wavenumber(j, n[1], cell_mpc);
        const double kp2 = k0 * k0 + k1 * k1;
        std::uint16_t* b = bin.data() + (i * n[1] + j) * half;
        for (std::size_t kh = 0; kh < half; ++kh)
          b[kh] = static_cast<std::uint16_t>(static_cast<std::int32_t>(std::sqrt(kp2 + kz2[kh]) * inv_dk + 0.5));
      }
    }
  }
  /// The window's gain per bin: sin and cos of b·dk·R by rotation (one exact anchor every 512
  /// bins keeps the recurrence's rounding below 1e-13).
  void window(double radius, std::vector<float>& gain) const {
    gain.resize(n_bins);
    const double step = dk * radius;
    const double cs = std::cos(step), sn = std::sin(step);
    double s = 0, c = 1;
    for (std::size_t b = 0; b < n_bins; ++b) {
      const double x = static_cast<double>(b) * step;
      if (b % 512 == 0) {
        s = std::sin(x);
        c = std::cos(x);
      }
      gain[b] = static_cast<float>(top_hat(x, s, c));
      const double s1 = s * cs + c * sn;
      c = c * cs - s * sn;
      s = s1;
    }
  }
  /// dst[i] = W(|k| R_i) src over the local modes for the radii of one batch (at most
  /// max_batch), reading src and the bins once. The gains are interleaved by bin so that one
  /// mode's gains share a cache line. The outputs are streamed past the caches (each is 4 bytes
  /// per cell, read next by its transform, so caching its lines first would only add traffic).
  static constexpr std::size_t max_batch = 2;  // 4 would save ~0.5 ms per radius for 8 more B/cell
  void smooth(const fft::SlabField& src, fft::SlabField* const* dst, const double* radius, std::size_t m,
              std::vector<float>& gains, std::vector<float>& one) const {
    gains.resize(n_bins * m);
    for (std::size_t i = 0; i < m; ++i) {
      window(radius[i], one);
      for (std::size_t b = 0; b < n_bins; ++b) gains[b * m + i] = one[b];
    }
    switch (m) {
      case 1: smooth_m<1>(src, dst, gains.data()); break;
      default: smooth_m<2>(src, dst, gains.data()); break;
    }
  }
  template <std::size_t M>
  void smooth_m(const fft::SlabField& src, fft::SlabField* const* dst, const float* gains) const {
    const std::uint16_t* bq = bin.data();
    const float* a = reinterpret_cast<const float*>(src.complex_data());
    float* out[M];
    for (std::size_t i = 0; i < M; ++i) out[i] = reinterpret_cast<float*>(dst[i]->complex_data());
    const std::size_t n = bin.size();
    std::size_t q = 0;
#if defined(__SSE2__)
    for (; q + 2 <= n; q += 2) {
      const __m128 v = _mm_load_ps(a + 2 * q);
      const float* g0 = gains + std::size_t{bq[q]} * M;
      const float* g1 = gains + std::size_t{bq[q + 1]} * M;
      for (std::size_t i = 0; i < M; ++i)
        _mm_stream_ps(out[i] + 2 * q, _mm_mul_ps(v, _mm_set_ps(g1[i], g1[i], g0[i], g0[i])));
    }
    _mm_sfence();
#endif
    for (; q < n; ++q)
      for (std::size_t i = 0; i < M; ++i) {
        const float g = gains[std::size_t{bq[q]} * M + i];
        out[i][2 * q] = a[2 * q] * g;
        out[i][2 * q + 1] = a[2 * q + 1] * g;
      }
  }
};


}  // namespace spinflip::sim::detail
