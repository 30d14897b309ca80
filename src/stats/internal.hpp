// Internal to src/stats: kernel factories and shared helpers.
#pragma once
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <complex>
#include <memory>
#include <mutex>
#include <string>
#include <vector>

#include "core/errors.hpp"
#include "fft/fft.hpp"
#include "stats/stats.hpp"

namespace spinflip::stats::detail {

std::unique_ptr<Kernel> make_power(const core::Config& c, const std::string& table, UnitKind kind);
std::unique_ptr<Kernel> make_cylindrical(const core::Config& c);
std::unique_ptr<Kernel> make_scattering(const core::Config& c);
std::unique_ptr<Kernel> make_scattering3d(const core::Config& c);
void declare_scattering3d(core::Schema& s);  // [stats.scattering3d] keys, beside the kernel
std::unique_ptr<Kernel> make_bispectrum(const core::Config& c, const std::string& table, UnitKind kind);
std::unique_ptr<Kernel> make_moments(const core::Config& c, const std::string& table, UnitKind kind);

/// Bin edges: `bins` bins from lo to hi, geometric if log_bins else linear.
std::vector<double> bin_edges(double lo, double hi, std::size_t bins, bool log_bins);

/// Wavenumber 2π m / (N Δ) of index i on an axis of n cells, fftfreq order.
inline double wavenumber(std::size_t i, std::size_t n, double cell) {
  const long m = i < (n + 1) / 2 ? static_cast<long>(i) : static_cast<long>(i) - static_cast<long>(n);
  return 2.0 * M_PI * static_cast<double>(m) / (static_cast<double>(n) * cell);
}

/// Weight of r2c half-grid plane k (last axis of n cells) in a full-grid sum:
/// planes other than 0 and the Nyquist plane stand for themselves and their mirror.
inline double half_plane_weight(std::size_t k, std::size_t n) {
  return (k == 0 || (n % 2 == 0 && k == n / 2)) ? 1.0 : 2.0;
}

/// `data` itself if it is 64-byte aligned, else a copy in `keep`. FFTW picks plans by
/// alignment, so this keeps results bit-identical wherever the caller's array lives.
inline const float* aligned(const float* data, std::size_t n, fft::Buffer<float>& keep) {
  if (reinterpret_cast<std::uintptr_t>(data) % 64 == 0) return data;
  keep = fft::Buffer<float>(n);
  std::copy(data, data + n, keep.data());
  return keep.data();
}

/// Kept-mode lookup on the r2c half grid of a unit seen as rows × h2 (a chunk's rows are
/// its transverse cells, the half axis is the line of sight; a slice is one row of
/// transverse cells per index of axis 0, the half axis its axis 1). The mirror of a
/// half-grid mode has the same entry: the uv coverage is Hermitian (conjugate visibilities).
struct KeptView {
  const KeptModes& kept;
  bool two_d;
  std::size_t n2;  // full length of the half axis
  KeptView(const KeptModes& k, const Geometry& g);
  std::size_t cell(std::size_t row, std::size_t kk) const { return two_d ? row * n2 + kk : row; }
  bool keeps(std::size_t row, std::size_t kk) const {
    if (kept.kpar_cut.empty()) return true;
    const auto c = kept.kpar_cut[cell(row, kk)];
    return c != KeptModes::none && (two_d || kk >= c);
  }
  double weight2(std::size_t row, std::size_t kk) const {
    return kept.weight2.empty() ? 1.0 : static_cast<double>(kept.weight2[cell(row, kk)]);
  }
};

/// InputError "<kernel>: needs a <2D|3D> unit, got shape (a, b, c)".
void require_dims(const std::string& kernel, const Geometry& g, UnitKind kind);
std::string shape_text(const std::vector<std::size_t>& shape);

/// A cache of per-geometry tables; get() builds once under the mutex.
template <class Key, class Table>
class TableCache {
 public:
  template <class Build>
  std::shared_ptr<const Table> get(const Key& key, Build&& build) const {
    std::lock_guard lock(mutex_);
    for (auto& [k, t] : entries_)
      if (k == key) return t;
    auto t = std::make_shared<const Table>(build());
    if (entries_.size() >= 8) entries_.erase(entries_.begin());  // bounded: a campaign uses few shapes
    entries_.emplace_back(key, t);
    return t;
  }

 private:
  mutable std::mutex mutex_;
  mutable std::vector<std::pair<Key, std::shared_ptr<const Table>>> entries_;
};

}  // namespace spinflip::stats::detail
