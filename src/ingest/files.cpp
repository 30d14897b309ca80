// Cone files: headers, memory-mapped .npy/raw arrays and HDF5 hyperslabs.
#include <fcntl.h>
#include <hdf5.h>
#include <sys/mman.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <bit>
#include <cmath>
#include <cstring>
#include <fstream>
#include <toml++/toml.h>
#include <utility>

#include "core/errors.hpp"
#include "core/printable.hpp"
#include "cosmo/cosmology.hpp"
#include "ingest/internal.hpp"
#include "stats/npy.hpp"

namespace spinflip::ingest::detail {
namespace {

// ---- HDF5: move-only owners; the automatic error printer is off and failures
// become one-line spinflip errors naming the file and the object.
class H5 {
 public:
  using Closer = herr_t (*)(hid_t);
  H5(hid_t id, Closer c) : id_(id), closer_(c) {}
  H5(const H5&) = delete;
  H5& operator=(const H5&) = delete;
  H5(H5&& o) noexcept : id_(std::exchange(o.id_, H5I_INVALID_HID)), closer_(o.closer_) {}
  ~H5() {
    if (id_ >= 0) closer_(id_);
  }
  hid_t id() const { return id_; }
  bool ok() const { return id_ >= 0; }

 private:
  hid_t id_;
  Closer closer_;
};

void h5_quiet() { H5Eset_auto2(H5E_DEFAULT, nullptr, nullptr); }

herr_t innermost_walk(unsigned n, const H5E_error2_t* e, void* data) {
  if (n == 0 && e->desc) *static_cast<std::string*>(data) = e->desc;
  return 0;
}
std::string h5_message() {
  std::string msg;
  H5Ewalk2(H5E_DEFAULT, H5E_WALK_DOWNWARD, innermost_walk, &msg);
  return msg.empty() ? "HDF5 error" : msg;
}

H5 h5_open_file(const std::filesystem::path& file, MPI_Comm group) {
  h5_quiet();
  int size = 1;
  if (group != MPI_COMM_SELF) MPI_Comm_size(group, &size);
  H5 fapl(H5Pcreate(H5P_FILE_ACCESS), H5Pclose);
  if (!fapl.ok()) throw InternalError("H5Pcreate(H5P_FILE_ACCESS) failed: " + h5_message());
  if (size > 1 && H5Pset_fapl_mpio(fapl.id(), group, MPI_INFO_NULL) < 0)
    throw InternalError("H5Pset_fapl_mpio failed: " + h5_message());
  if (H5Fis_hdf5(file.c_str()) <= 0)
    throw InputError(file.string() + ": not an HDF5 file (or unreadable)");
  H5 f(H5Fopen(file.c_str(), H5F_ACC_RDONLY, fapl.id()), H5Fclose);
  if (!f.ok()) throw InputError(file.string() + ": cannot open as HDF5: " + h5_message());
  return f;
}

H5 h5_open_dataset(const H5& f, const std::filesystem::path& file, const std::string& path, const char* key) {
  // H5Lexists walks intermediate groups only if they exist: check each level.
  std::string prefix;
  std::size_t pos = 0;
  while (pos <= path.size()) {
    auto slash = path.find('/', pos);
    if (slash == std::string::npos) slash = path.size();
    const std::string part = path.substr(pos, slash - pos);
    if (!part.empty()) {
      prefix += (prefix.empty() && path[0] != '/' ? "" : "/") + part;
      if (H5Lexists(f.id(), prefix.c_str(), H5P_DEFAULT) <= 0)
        throw InputError(file.string() + ": no HDF5 object '" + path + "' (" + key + ")");
    }
    pos = slash + 1;
  }
  H5 d(H5Dopen2(f.id(), path.c_str(), H5P_DEFAULT), H5Dclose);
  if (!d.ok()) throw InputError(file.string() + ": '" + path + "' is not a dataset (" + key + ")");
  return d;
}

/// Rank and dimensions of a dataset; floating point of 4 or 8 bytes required.
std::vector<hsize_t> h5_dims(const H5& d, const std::filesystem::path& file, const std::string& path,
                             std::size_t& width) {
  H5 type(H5Dget_type(d.id()), H5Tclose);
  if (!type.ok() || H5Tget_class(type.id()) != H5T_FLOAT)
    throw InputError(file.string() + ": dataset '" + path + "' is not floating point (float32 or float64 allowed)");
  width = H5Tget_size(type.id());
  if (width != 4 && width != 8)
    throw InputError(file.string() + ": dataset '" + path + "' has " + std::to_string(width) +
                     "-byte floats (float32 or float64 allowed)");
  H5 space(H5Dget_space(d.id()), H5Sclose);
  const int rank = H5Sget_simple_extent_ndims(space.id());
  if (rank < 0) throw InputError(file.string() + ": dataset '" + path + "' has no simple dataspace");
  std::vector<hsize_t> dims(static_cast<std::size_t>(rank));
  H5Sget_simple_extent_dims(space.id(), dims.data(), nullptr);
  return dims;
}

// ---- Memory-mapped files (.npy, raw): read-only, private, unmapped on scope exit.
class Mapping {
 public:
  explicit Mapping(const std::filesystem::path& file) {
    fd_ = ::open(file.c_str(), O_RDONLY | O_CLOEXEC);
    if (fd_ < 0) throw IoError(file.string() + ": cannot open for reading: " + std::strerror(errno));
    struct stat st{};
    if (::fstat(fd_, &st) != 0) throw IoError(file.string() + ": cannot stat: " + std::strerror(errno));
    size_ = static_cast<std::size_t>(st.st_size);
    if (size_ > 0) {
      void* p = ::mmap(nullptr, size_, PROT_READ, MAP_PRIVATE, fd_, 0);
      if (p == MAP_FAILED) throw IoError(file.string() + ": cannot memory-map: " + std::strerror(errno));
      data_ = static_cast<const unsigned char*>(p);
    }
  }
  Mapping(const Mapping&) = delete;
  Mapping& operator=(const Mapping&) = delete;
  ~Mapping() {
    if (data_) ::munmap(const_cast<unsigned char*>(data_), size_);
    if (fd_ >= 0) ::close(fd_);
  }
  const unsigned char* data() const { return data_; }
  std::size_t size() const { return size_; }

 private:
  int fd_ = -1;
  const unsigned char* data_ = nullptr;
  std::size_t size_ = 0;
};

std::size_t size_of_file(const std::filesystem::path& file) {
  std::error_code ec;
  auto n = std::filesystem::file_size(file, ec);
  if (ec) throw IoError(file.string() + ": cannot read the file size: " + ec.message());
  return static_cast<std::size_t>(n);
}

FileHeader npy_header(const std::filesystem::path& file) {
  const std::string where = file.string();
  std::ifstream in(file, std::ios::binary);
  if (!in) throw IoError(where + ": cannot open for reading");
  char magic[8];
  if (!in.read(magic, 8) || std::memcmp(magic, "\x93NUMPY", 6) != 0)
    throw InputError(where + ": not a .npy file (no \\x93NUMPY magic string)");
  const int major = static_cast<unsigned char>(magic[6]);
  std::size_t len_bytes = major == 1 ? 2 : (major == 2 || major == 3) ? 4 : 0;
  if (len_bytes == 0)
    throw InputError(where + ": .npy format version " + std::to_string(major) + " is not supported (1, 2 or 3)");
  unsigned char b[4] = {0, 0, 0, 0};
  if (!in.read(reinterpret_cast<char*>(b), static_cast<std::streamsize>(len_bytes)))
    throw InputError(where + ": truncated .npy header");
  const std::size_t header_len = b[0] | (b[1] << 8) | (static_cast<std::size_t>(b[2]) << 16) |
                                 (static_cast<std::size_t>(b[3]) << 24);
  std::string text(header_len, '\0');
  if (!in.read(text.data(), static_cast<std::streamsize>(header_len)) || text.find('}') == std::string::npos)
    throw InputError(where + ": truncated .npy header");
  FileHeader h;
  h.format = Format::npy;
  std::vector<std::size_t> shape;
  stats::parse_npy_header(text, where, h.dtype, h.fortran, shape);  // the stats module's parser
  const std::string& t = h.dtype;
  if (t.size() != 3 || (t[0] != '<' && t[0] != '>' && t[0] != '=' && t[0] != '|') || t[1] != 'f' ||
      (t[2] != '4' && t[2] != '8'))
    throw InputError(where + ": dtype '" + t + "' is not supported (float32 or float64, either byte order)");
  h.width = t[2] == '4' ? 4 : 8;
  h.swap = (t[0] == '>' && std::endian::native == std::endian::little) ||
           (t[0] == '<' && std::endian::native == std::endian::big);
  if (shape.size() != 3)
    throw InputError(where + ": array has " + std::to_string(shape.size()) + " dimensions, a light cone needs 3");
  std::copy(shape.begin(), shape.end(), h.shape.begin());
  h.data_offset = 8 + len_bytes + header_len;
  const std::size_t need = h.data_offset + h.shape[0] * h.shape[1] * h.shape[2] * h.width;
  const std::size_t have = size_of_file(file);
  if (have < need)
    throw InputError(where + ": truncated .npy: shape " + shape_text(h.shape) + " " + t + " needs " +
                     std::to_string(need) + " bytes, the file has " + std::to_string(have));
  return h;
}

std::filesystem::path sidecar_of(const std::filesystem::path& file) {
  return std::filesystem::path(file.string() + ".toml");
}

FileHeader raw_header(const std::filesystem::path& file) {
  const auto side = sidecar_of(file);
  const std::string where = side.string();
  if (!std::filesystem::is_regular_file(side))
    throw InputError(file.string() + ": raw float32 file needs its sidecar " + where +
                     " (shape = [n0, n1, n2], optional order, offset_bytes, los_values)");
  toml::table t;
  try {
    t = toml::parse_file(side.string());
  } catch (const toml::parse_error& e) {
    throw InputError(where + ":" + std::to_string(e.source().begin.line) + ": not valid TOML: " +
                     printable(e.description(), 200));
  }
  for (auto&& [key, node] : t) {
    const std::string k(key.str());
    if (k != "shape" && k != "order" && k != "offset_bytes" && k != "los_values")
      throw InputError(where + ":" + std::to_string(node.source().begin.line) + ": unknown key '" + k +
                       "' (allowed: shape, order, offset_bytes, los_values)");
  }
  FileHeader h;
  h.format = Format::raw;
  h.width = 4;
  h.dtype = "<f4";
  h.swap = std::endian::native == std::endian::big;
  const toml::array* shape = t["shape"].as_array();
  if (!shape || shape->size() != 3)
    throw InputError(where + ": shape must be an array of 3 positive integers (a light cone is 3D)");
  for (std::size_t a = 0; a < 3; ++a) {
    auto v = (*shape)[a].value<std::int64_t>();
    if (!v || *v <= 0) throw InputError(where + ": shape must be an array of 3 positive integers");
    h.shape[a] = static_cast<std::size_t>(*v);
  }
  const std::string order = t["order"].value_or(std::string("C"));
  if (order != "C" && order != "F") throw InputError(where + ": order = '" + order + "' (allowed: \"C\", \"F\")");
  h.fortran = order == "F";
  const auto off = t["offset_bytes"].value_or(std::int64_t{0});
  if (off < 0) throw InputError(where + ": offset_bytes must not be negative");
  h.data_offset = static_cast<std::size_t>(off);
  if (const toml::array* lv = t["los_values"].as_array()) {
    for (auto& e : *lv) {
      auto v = e.value<double>();
      if (!v) throw InputError(where + ": los_values must be numbers");
      h.los_values.push_back(*v);
    }
  }
  const std::size_t need = h.data_offset + h.shape[0] * h.shape[1] * h.shape[2] * 4;
  const std::size_t have = size_of_file(file);
  if (have < need)
    throw InputError(file.string() + ": truncated raw file: shape " + shape_text(h.shape) +
                     " float32 after offset " + std::to_string(h.data_offset) + " needs " + std::to_string(need) +
                     " bytes, the file has " + std::to_string(have));
  return h;
}

FileHeader hdf5_header(const std::filesystem::path& file, const Layout& layout) {
  H5 f = h5_open_file(file, MPI_COMM_SELF);
  H5 d = h5_open_dataset(f, file, layout.dataset, "ingest.dataset");
  FileHeader h;
  h.format = Format::hdf5;
  const auto dims = h5_dims(d, file, layout.dataset, h.width);
  h.dtype = h.width == 4 ? "float32" : "float64";
  if (dims.size() != 3)
    throw InputError(file.string() + ": dataset '" + layout.dataset + "' has rank " + std::to_string(dims.size()) +
                     ", a light cone needs rank 3");
  for (std::size_t a = 0; a < 3; ++a) h.shape[a] = static_cast<std::size_t>(dims[a]);
  if (!layout.los_dataset.empty()) {
    H5 c = h5_open_dataset(f, file, layout.los_dataset, "ingest.los_dataset");
    std::size_t w = 0;
    const auto cd = h5_dims(c, file, layout.los_dataset, w);
    if (cd.size() != 1)
      throw InputError(file.string() + ": LOS coordinate dataset '" + layout.los_dataset + "' has rank " +
                       std::to_string(cd.size()) + ", needs rank 1");
    h.los_values.resize(static_cast<std::size_t>(cd[0]));
    if (H5Dread(c.id(), H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, h.los_values.data()) < 0)
      throw InputError(file.string() + ": cannot read '" + layout.los_dataset + "': " + h5_message());
  }
  return h;
}

/// Value at byte address p of a float of `width` bytes, byte-swapped if asked.
inline double load(const unsigned char* p, std::size_t width, bool swap) {
  unsigned char b[8];
  std::memcpy(b, p, width);
  if (swap) std::reverse(b, b + width);
  if (width == 4) {
    float v;
    std::memcpy(&v, b, 4);
    return v;
  }
  double v;
  std::memcpy(&v, b, 8);
  return v;
}

/// Element strides (in values) of the file axes for C or Fortran order.
std::array<std::size_t, 3> strides_of(const std::array<std::size_t, 3>& shape, bool fortran) {
  if (fortran) return {1, shape[0], shape[0] * shape[1]};
  return {shape[1] * shape[2], shape[2], 1};
}

/// Gather (x, y, los) block from a strided array whose file-axis origin is
/// `origin` (the first element present in `base`).
void gather(const unsigned char* base, std::size_t width, bool swap, const std::array<std::size_t, 3>& fstride,
            const std::array<std::size_t, 3>& origin, const Layout& layout, std::size_t x0, std::size_t nx,
            std::size_t ny, std::size_t j_lo, std::size_t nj, std::vector<float>& out) {
  const int ax = layout.file_axis[0], ay = layout.file_axis[1], al = layout.file_axis[2];
  const std::size_t sx = fstride[ax] * width, sy = fstride[ay] * width, sl = fstride[al] * width;
  const std::size_t offset =
      ((x0 - origin[ax]) * fstride[ax] + (0 - origin[ay]) * fstride[ay] + (j_lo - origin[al]) * fstride[al]) *
      width;
  out.resize(nx * ny * nj);
  const float scale = static_cast<float>(layout.to_mK);
  for (std::size_t i = 0; i < nx; ++i)
    for (std::size_t j = 0; j < ny; ++j) {
      const unsigned char* p = base + offset + i * sx + j * sy;
      float* o = out.data() + (i * ny + j) * nj;
      for (std::size_t k = 0; k < nj; ++k) o[k] = static_cast<float>(load(p + k * sl, width, swap)) * scale;
    }
}

}  // namespace

Format format_of(const std::filesystem::path& file, const Layout& layout) {
  if (layout.format != Format::automatic) return layout.format;
  const std::string ext = file.extension().string();
  if (ext == ".h5" || ext == ".hdf5" || ext == ".he5") return Format::hdf5;
  if (ext == ".npy") return Format::npy;
  return Format::raw;
}

FileHeader open_header(const std::filesystem::path& file, const Layout& layout) {
  if (!std::filesystem::exists(file)) throw InputError(file.string() + ": no such file");
  if (!std::filesystem::is_regular_file(file)) throw InputError(file.string() + ": not a regular file");
  switch (format_of(file, layout)) {
    case Format::hdf5: return hdf5_header(file, layout);
    case Format::npy: return npy_header(file);
    default: return raw_header(file);
  }
}

std::vector<double> los_coordinates(const std::filesystem::path& file, const FileHeader& h, const Layout& layout) {
  const std::size_t n = h.shape[static_cast<std::size_t>(layout.file_axis[2])];
  if (!h.los_values.empty()) {
    if (h.los_values.size() != n)
      throw InputError(file.string() + ": " + std::to_string(h.los_values.size()) +
                       " line-of-sight coordinates for " + std::to_string(n) + " slices (file axis " +
                       std::to_string(layout.file_axis[2]) + " is the line of sight)");
    return h.los_values;
  }
  if (!layout.los_start || !layout.los_step)
    throw InputError(file.string() + ": no line-of-sight coordinate: set ingest.los_start and ingest.los_step" +
                     std::string(h.format == Format::hdf5 ? " or ingest.los_dataset" : "") +
                     (h.format == Format::raw ? " (or los_values in the sidecar)" : ""));
  std::vector<double> c(n);
  for (std::size_t j = 0; j < n; ++j) c[j] = *layout.los_start + static_cast<double>(j) * *layout.los_step;
  return c;
}

std::vector<double> to_distance(const std::vector<double>& coord, LosCoordinate kind, const cosmo::Cosmology& c) {
  std::vector<double> d(coord.size());
  for (std::size_t j = 0; j < coord.size(); ++j) {
    const double v = coord[j];
    if (!std::isfinite(v)) {
      d[j] = v;
      continue;
    }
    switch (kind) {
      case LosCoordinate::distance_mpc: d[j] = v; break;
      case LosCoordinate::redshift: d[j] = v > -1.0 ? c.comoving_distance_mpc(v) : NAN; break;
      case LosCoordinate::frequency_MHz:
        d[j] = v > 0.0 && v <= cosmo::nu21_MHz ? c.comoving_distance_mpc(cosmo::redshift_at_frequency(v)) : NAN;
        break;
    }
  }
  return d;
}

std::vector<float> read_block(const std::filesystem::path& file, const FileHeader& h, const Layout& layout,
                              std::size_t x0, std::size_t nx, std::size_t j_lo, std::size_t nj, MPI_Comm group) {
  const std::size_t ny = h.shape[static_cast<std::size_t>(layout.file_axis[1])];
  std::vector<float> out;
  if (h.format != Format::hdf5) {
    Mapping map(file);
    if (map.size() < h.data_offset + h.shape[0] * h.shape[1] * h.shape[2] * h.width)
      throw InputError(file.string() + ": the file shrank since its header was read");
    if (nx == 0) return out;
    gather(map.data() + h.data_offset, h.width, h.swap, strides_of(h.shape, h.fortran), {0, 0, 0}, layout, x0, nx,
           ny, j_lo, nj, out);
    return out;
  }
  // HDF5: each rank selects its hyperslab (x range, all y, the LOS slices
  // needed); with a group the read is collective over MPI-IO.
  int size = 1;
  if (group != MPI_COMM_SELF) MPI_Comm_size(group, &size);
  H5 f = h5_open_file(file, size > 1 ? group : MPI_COMM_SELF);
  H5 d = h5_open_dataset(f, file, layout.dataset, "ingest.dataset");
  H5 fspace(H5Dget_space(d.id()), H5Sclose);
  std::array<hsize_t, 3> start{0, 0, 0}, count{h.shape[0], h.shape[1], h.shape[2]};
  start[layout.file_axis[0]] = x0;
  count[layout.file_axis[0]] = nx;
  start[layout.file_axis[2]] = j_lo;
  count[layout.file_axis[2]] = nj;
  const std::size_t n = nx * ny * nj;
  if (n == 0) {
    H5Sselect_none(fspace.id());
  } else if (H5Sselect_hyperslab(fspace.id(), H5S_SELECT_SET, start.data(), nullptr, count.data(), nullptr) < 0) {
    throw InternalError("H5Sselect_hyperslab failed on " + file.string() + ": " + h5_message());
  }
  const hsize_t mdim = n;
  H5 mspace(H5Screate_simple(1, &mdim, nullptr), H5Sclose);
  if (n == 0) H5Sselect_none(mspace.id());
  H5 dxpl(H5Pcreate(H5P_DATASET_XFER), H5Pclose);
  if (size > 1) H5Pset_dxpl_mpio(dxpl.id(), H5FD_MPIO_COLLECTIVE);
  std::vector<float> block(std::max<std::size_t>(n, 1));
  if (H5Dread(d.id(), H5T_NATIVE_FLOAT, mspace.id(), fspace.id(), dxpl.id(), block.data()) < 0)
    throw InputError(file.string() + ": reading '" + layout.dataset + "' failed: " + h5_message());
  if (n == 0) return out;
  // The block is C order over the file axes with the selected counts.
  std::array<std::size_t, 3> bshape{count[0], count[1], count[2]};
  std::array<std::size_t, 3> origin{start[0], start[1], start[2]};
  gather(reinterpret_cast<const unsigned char*>(block.data()), 4, false, strides_of(bshape, false), origin, layout,
         x0, nx, ny, j_lo, nj, out);
  return out;
}

std::string scan_nonfinite(const std::filesystem::path& file, const FileHeader& h, const Layout& layout) {
  const std::size_t n = h.shape[0] * h.shape[1] * h.shape[2];
  auto index_text = [&](std::size_t flat) {
    // Position in file axes from the flat storage index.
    std::array<std::size_t, 3> idx{};
    if (h.fortran) {
      idx[0] = flat % h.shape[0];
      idx[1] = (flat / h.shape[0]) % h.shape[1];
      idx[2] = flat / (h.shape[0] * h.shape[1]);
    } else {
      idx[2] = flat % h.shape[2];
      idx[1] = (flat / h.shape[2]) % h.shape[1];
      idx[0] = flat / (h.shape[1] * h.shape[2]);
    }
    return shape_text(idx);
  };
  if (h.format != Format::hdf5) {
    Mapping map(file);
    const unsigned char* p = map.data() + h.data_offset;
    for (std::size_t i = 0; i < n; ++i)
      if (!std::isfinite(load(p + i * h.width, h.width, h.swap))) return index_text(i);
    return "";
  }
  // HDF5: read plane by plane of file axis 0 to bound memory.
  H5 f = h5_open_file(file, MPI_COMM_SELF);
  H5 d = h5_open_dataset(f, file, layout.dataset, "ingest.dataset");
  H5 fspace(H5Dget_space(d.id()), H5Sclose);
  const std::size_t plane = h.shape[1] * h.shape[2];
  std::vector<double> buf(plane);
  const hsize_t mdim = plane;
  H5 mspace(H5Screate_simple(1, &mdim, nullptr), H5Sclose);
  for (std::size_t i0 = 0; i0 < h.shape[0]; ++i0) {
    std::array<hsize_t, 3> start{i0, 0, 0}, count{1, h.shape[1], h.shape[2]};
    H5Sselect_hyperslab(fspace.id(), H5S_SELECT_SET, start.data(), nullptr, count.data(), nullptr);
    if (H5Dread(d.id(), H5T_NATIVE_DOUBLE, mspace.id(), fspace.id(), H5P_DEFAULT, buf.data()) < 0)
      throw InputError(file.string() + ": reading '" + layout.dataset + "' failed: " + h5_message());
    for (std::size_t q = 0; q < plane; ++q)
      if (!std::isfinite(buf[q])) return index_text(i0 * plane + q);
  }
  return "";
}

}  // namespace spinflip::ingest::detail
