// Test helper: write a .npy file (format 1.0, little endian) as numpy's
// numpy/lib/format.py describes it: magic, version, header length, a Python
// dict literal padded with spaces to a multiple of 64 bytes, then the data.
#pragma once
#include <cstdint>
#include <fstream>
#include <stdexcept>
#include <string>
#include <vector>

namespace spinflip::ingest::test {

template <class T>
void write_npy(const std::string& path, const std::vector<std::size_t>& shape, const std::vector<T>& data,
               bool fortran = false, std::size_t truncate_bytes = 0) {
  static_assert(sizeof(T) == 4 || sizeof(T) == 8);
  std::string dims;
  for (std::size_t i = 0; i < shape.size(); ++i) dims += std::to_string(shape[i]) + (shape.size() == 1 || i + 1 < shape.size() ? ", " : "");
  std::string header = std::string("{'descr': '<f") + (sizeof(T) == 4 ? "4" : "8") +
                       "', 'fortran_order': " + (fortran ? "True" : "False") + ", 'shape': (" + dims + "), }";
  while ((10 + header.size() + 1) % 64 != 0) header += ' ';
  header += '\n';
  std::ofstream out(path, std::ios::binary);
  if (!out) throw std::runtime_error("cannot write " + path);
  out.write("\x93NUMPY\x01\x00", 8);
  const auto n = static_cast<std::uint16_t>(header.size());
  const char len[2] = {static_cast<char>(n & 0xff), static_cast<char>(n >> 8)};
  out.write(len, 2);
  out.write(header.data(), static_cast<std::streamsize>(header.size()));
  const std::size_t bytes = data.size() * sizeof(T) - truncate_bytes;
  out.write(reinterpret_cast<const char*>(data.data()), static_cast<std::streamsize>(bytes));
}

}  // namespace spinflip::ingest::test
