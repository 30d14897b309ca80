// Reader for NumPy .npy arrays (format versions 1–3; the format is specified in
// numpy's numpy/lib/format.py documentation): float32 or float64, either byte
// order, C or Fortran order; returned as float32 in C order.
#pragma once
#include <cstddef>
#include <filesystem>
#include <string>
#include <vector>

namespace spinflip::stats {

struct NpyArray {
  std::vector<std::size_t> shape;
  std::vector<float> data;  // C order
  std::string dtype;        // as written in the header, e.g. "<f8"
};

/// Throws InputError (malformed or unsupported file) or IoError (unreadable).
NpyArray read_npy(const std::filesystem::path& path);

/// Parse just the header dictionary text (exposed for tests).
void parse_npy_header(const std::string& header, const std::string& where, std::string& descr, bool& fortran,
                      std::vector<std::size_t>& shape);

}  // namespace spinflip::stats
