#include "stats/npy.hpp"

#include <algorithm>
#include <bit>
#include <cstdint>
#include <cstring>
#include <fstream>
#include <system_error>

#include "core/errors.hpp"
#include "core/printable.hpp"

namespace spinflip::stats {
namespace {

std::string trim(const std::string& s) {
  const auto a = s.find_first_not_of(" \t\n"), b = s.find_last_not_of(" \t\n");
  return a == std::string::npos ? "" : s.substr(a, b - a + 1);
}

/// Text of the value of 'key' in the header dict, up to the next top-level comma.
std::string dict_value(const std::string& h, const std::string& key, const std::string& where) {
  const auto k = h.find("'" + key + "'");
  if (k == std::string::npos) throw InputError(where + ": .npy header has no '" + key + "' entry");
  auto colon = h.find(':', k);
  if (colon == std::string::npos) throw InputError(where + ": .npy header entry '" + key + "' has no value");
  std::size_t i = colon + 1;
  int depth = 0;
  std::string v;
  for (; i < h.size(); ++i) {
    const char c = h[i];
    if (c == '(' || c == '[') ++depth;
    if (c == ')' || c == ']') --depth;
    if (depth == 0 && (c == ',' || c == '}')) break;
    v += c;
  }
  return trim(v);
}

}  // namespace

void parse_npy_header(const std::string& header, const std::string& where, std::string& descr, bool& fortran,
                      std::vector<std::size_t>& shape) {
  std::string d = dict_value(header, "descr", where);
  if (d.size() < 2 || (d.front() != '\'' && d.front() != '"'))
    throw InputError(where + ": .npy descr " + printable(d) + " is not a simple dtype string");
  descr = d.substr(1, d.size() - 2);
  const std::string f = dict_value(header, "fortran_order", where);
  if (f != "True" && f != "False") throw InputError(where + ": .npy fortran_order = " + printable(f) + " is not True/False");
  fortran = f == "True";
  std::string s = dict_value(header, "shape", where);
  if (s.size() < 2 || s.front() != '(' || s.back() != ')')
    throw InputError(where + ": .npy shape " + printable(s) + " is not a tuple");
  s = s.substr(1, s.size() - 2);
  shape.clear();
  std::size_t pos = 0;
  while (pos < s.size()) {
    auto comma = s.find(',', pos);
    const std::string item = trim(s.substr(pos, comma == std::string::npos ? std::string::npos : comma - pos));
    if (!item.empty()) {
      if (!std::all_of(item.begin(), item.end(), [](char c) { return c >= '0' && c <= '9'; }) || item.size() > 15)
        throw InputError(where + ": .npy shape entry '" + printable(item) + "' is not a dimension");
      shape.push_back(std::stoull(item));
    }
    if (comma == std::string::npos) break;
    pos = comma + 1;
  }
}

NpyArray read_npy(const std::filesystem::path& path) {
  const std::string where = path.string();
  std::ifstream in(path, std::ios::binary);
  if (!in) throw IoError(where + ": cannot open for reading");
  char magic[8];
  if (!in.read(magic, 8) || std::memcmp(magic, "\x93NUMPY", 6) != 0)
    throw InputError(where + ": not a .npy file (no \\x93NUMPY magic string)");
  const int major = static_cast<unsigned char>(magic[6]);
  std::uint32_t header_len = 0;
  if (major == 1) {
    unsigned char b[2];
    if (!in.read(reinterpret_cast<char*>(b), 2)) throw InputError(where + ": truncated .npy header");
    header_len = b[0] | (b[1] << 8);
  } else if (major == 2 || major == 3) {
    unsigned char b[4];
    if (!in.read(reinterpret_cast<char*>(b), 4)) throw InputError(where + ": truncated .npy header");
    header_len = b[0] | (b[1] << 8) | (b[2] << 16) | (static_cast<std::uint32_t>(b[3]) << 24);
  } else {
    throw InputError(where + ": .npy format version " + std::to_string(major) + " is not supported (1, 2 or 3)");
  }
  // Sizes from the file are checked against its length before anything is
  // allocated (a damaged length field must not ask for gigabytes).
  std::error_code ec;
  const std::uintmax_t file_size = std::filesystem::file_size(path, ec);
  const std::uintmax_t header_end = static_cast<std::uintmax_t>(in.tellg()) + header_len;
  if (ec || header_end > file_size)
    throw InputError(where + ": truncated .npy header (needs " + std::to_string(header_len) + " bytes)");
  std::string header(header_len, '\0');
  if (!in.read(header.data(), header_len))
    throw InputError(where + ": truncated .npy header (needs " + std::to_string(header_len) + " bytes)");
  if (header.find('}') == std::string::npos) throw InputError(where + ": truncated .npy header (no closing '}')");

  NpyArray a;
  bool fortran = false;
  parse_npy_header(header, where, a.dtype, fortran, a.shape);
  const std::string& t = a.dtype;
  if (t.size() != 3 || (t[0] != '<' && t[0] != '>' && t[0] != '=' && t[0] != '|') || t[1] != 'f' ||
      (t[2] != '4' && t[2] != '8'))
    throw InputError(where + ": dtype '" + printable(t) + "' is not supported (float32 '<f4' or float64 '<f8', either byte order)");
  const std::size_t width = t[2] == '4' ? 4 : 8;
  const bool swap = (t[0] == '>' && std::endian::native == std::endian::little) ||
                    (t[0] == '<' && std::endian::native == std::endian::big);
  const std::uintmax_t data_bytes = file_size - header_end;
  std::uintmax_t need = width;
  bool overflow = false;
  for (auto s : a.shape) overflow |= __builtin_mul_overflow(need, static_cast<std::uintmax_t>(s), &need);
  if (overflow || need > data_bytes)
    throw InputError(where + ": data truncated: shape needs " +
                     (overflow ? std::string("more than 2^64") : std::to_string(need)) + " bytes, file has " +
                     std::to_string(data_bytes));
  const std::size_t n = need / width;
  std::vector<unsigned char> raw(n * width);
  if (!in.read(reinterpret_cast<char*>(raw.data()), static_cast<std::streamsize>(raw.size())))
    throw InputError(where + ": data truncated: shape needs " + std::to_string(raw.size()) + " bytes, file has " +
                     std::to_string(in.gcount()));
  std::vector<float> flat(n);
  for (std::size_t i = 0; i < n; ++i) {
    unsigned char* p = raw.data() + i * width;
    if (swap) std::reverse(p, p + width);
    if (width == 4) {
      float v;
      std::memcpy(&v, p, 4);
      flat[i] = v;
    } else {
      double v;
      std::memcpy(&v, p, 8);
      flat[i] = static_cast<float>(v);
    }
  }
  if (!fortran || a.shape.size() < 2) {
    a.data = std::move(flat);
    return a;
  }
  // Fortran order: the first index varies fastest. Re-lay out in C order.
  a.data.resize(n);
  const std::size_t dims = a.shape.size();
  std::vector<std::size_t> idx(dims, 0), fstride(dims), cstride(dims);
  fstride[0] = 1;
  for (std::size_t d = 1; d < dims; ++d) fstride[d] = fstride[d - 1] * a.shape[d - 1];
  cstride[dims - 1] = 1;
  for (std::size_t d = dims - 1; d-- > 0;) cstride[d] = cstride[d + 1] * a.shape[d + 1];
  for (std::size_t i = 0; i < n; ++i) {  // i walks Fortran order
    std::size_t c = 0;
    for (std::size_t d = 0; d < dims; ++d) c += idx[d] * cstride[d];
    a.data[c] = flat[i];
    for (std::size_t d = 0; d < dims; ++d) {
      if (++idx[d] < a.shape[d]) break;
      idx[d] = 0;
    }
  }
  return a;
}

}  // namespace spinflip::stats
