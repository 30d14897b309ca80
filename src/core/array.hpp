// Plain row-major (C order) arrays for fields. Axis 2 of a 3D field is the
// line of sight and is contiguous; a rank's slab is a range of axis 0.
#pragma once
#include <array>
#include <cstddef>
#include <vector>

namespace spinflip::core {

template <class T>
struct Array2 {
  std::array<std::size_t, 2> shape{0, 0};
  std::vector<T> data;

  Array2() = default;
  Array2(std::size_t n0, std::size_t n1, T fill = T{}) : shape{n0, n1}, data(n0 * n1, fill) {}
  T& operator()(std::size_t i, std::size_t j) { return data[i * shape[1] + j]; }
  const T& operator()(std::size_t i, std::size_t j) const { return data[i * shape[1] + j]; }
  std::size_t size() const { return data.size(); }
};

template <class T>
struct Array3 {
  std::array<std::size_t, 3> shape{0, 0, 0};
  std::vector<T> data;

  Array3() = default;
  Array3(std::size_t n0, std::size_t n1, std::size_t n2, T fill = T{})
      : shape{n0, n1, n2}, data(n0 * n1 * n2, fill) {}
  T& operator()(std::size_t i, std::size_t j, std::size_t k) { return data[(i * shape[1] + j) * shape[2] + k]; }
  const T& operator()(std::size_t i, std::size_t j, std::size_t k) const {
    return data[(i * shape[1] + j) * shape[2] + k];
  }
  std::size_t size() const { return data.size(); }
};

/// Fourier frequency index m of position i on an axis of n cells, fftfreq order:
/// 0, 1, ..., ceil(n/2)-1, -floor(n/2), ..., -1.
inline long fft_index(std::size_t i, std::size_t n) {
  return i < (n + 1) / 2 ? static_cast<long>(i) : static_cast<long>(i) - static_cast<long>(n);
}

}  // namespace spinflip::core
