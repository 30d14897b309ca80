#include "analysis/h5.hpp"

#include <algorithm>
#include <cstring>
#include <fstream>
#include <sstream>

#include "core/errors.hpp"

namespace spinflip::analysis::h5 {

void Id::reset() {
  if (id_ < 0) return;
  switch (H5Iget_type(id_)) {
    case H5I_FILE: H5Fclose(id_); break;
    case H5I_GROUP: H5Gclose(id_); break;
    case H5I_DATASET: H5Dclose(id_); break;
    case H5I_DATASPACE: H5Sclose(id_); break;
    case H5I_DATATYPE: H5Tclose(id_); break;
    case H5I_ATTR: H5Aclose(id_); break;
    case H5I_GENPROP_LST: H5Pclose(id_); break;
    default: break;
  }
  id_ = H5I_INVALID_HID;
}

void quiet_errors() { H5Eset_auto2(H5E_DEFAULT, nullptr, nullptr); }

namespace {
herr_t innermost(unsigned n, const H5E_error2_t* err, void* data) {
  if (n == 0 && err->desc) *static_cast<std::string*>(data) = err->desc;
  return 0;
}

void check(herr_t status, const std::string& what) {
  if (status < 0) throw IoError(what + ": " + last_error());
}

Id make_space(const std::vector<hsize_t>& dims) {
  if (dims.empty()) return Id(H5Screate(H5S_SCALAR));
  return Id(H5Screate_simple(static_cast<int>(dims.size()), dims.data(), nullptr));
}

Id string_type() {
  Id t(H5Tcopy(H5T_C_S1));
  H5Tset_size(t.get(), H5T_VARIABLE);
  H5Tset_cset(t.get(), H5T_CSET_UTF8);
  return t;
}

template <class T>
std::vector<T> read_numeric(hid_t loc, const std::string& path, const std::string& file, hid_t mem_type) {
  Id ds = open_dataset(loc, path, file);
  Id type(H5Dget_type(ds.get()));
  const H5T_class_t cls = H5Tget_class(type.get());
  if (cls != H5T_INTEGER && cls != H5T_FLOAT)
    throw InputError(file + ": dataset '" + path + "' is not numeric (see docs/catalogue.md)");
  hsize_t n = 1;
  for (hsize_t d : shape(ds.get())) n *= d;
  std::vector<T> out(n);
  if (n > 0) check(H5Dread(ds.get(), mem_type, H5S_ALL, H5S_ALL, H5P_DEFAULT, out.data()), file + ": reading '" + path + "'");
  return out;
}
}  // namespace

std::string last_error() {
  std::string msg = "HDF5 error";
  H5Ewalk2(H5E_DEFAULT, H5E_WALK_DOWNWARD, innermost, &msg);
  return msg;
}

Id open_read(const std::string& path) {
  quiet_errors();
  if (!std::ifstream(path).good()) throw IoError(path + ": cannot open catalogue (no such file or not readable)");
  if (H5Fis_hdf5(path.c_str()) <= 0) throw IoError(path + ": not an HDF5 file (expected a spinflip catalogue)");
  Id f(H5Fopen(path.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT));
  if (!f) throw IoError(path + ": cannot open as HDF5: " + last_error());
  return f;
}

Id create_file(const std::string& path) {
  quiet_errors();
  Id f(H5Fcreate(path.c_str(), H5F_ACC_TRUNC, H5P_DEFAULT, H5P_DEFAULT));
  if (!f) throw IoError(path + ": cannot create output file (" + last_error() + ")");
  return f;
}

Id create_memory_file() {
  quiet_errors();
  Id fapl(H5Pcreate(H5P_FILE_ACCESS));
  check(H5Pset_fapl_core(fapl.get(), 1 << 20, false), "in-memory output file");
  // A unique name: the core driver refuses a second open file of the same name.
  static int serial = 0;
  const std::string name = "spinflip-output-" + std::to_string(++serial);
  Id f(H5Fcreate(name.c_str(), H5F_ACC_TRUNC, H5P_DEFAULT, fapl.get()));
  if (!f) throw InternalError("cannot create an in-memory HDF5 file (" + last_error() + ")");
  return f;
}

void save_file(Id& file, core::OutputFile& target) {
  check(H5Fflush(file.get(), H5F_SCOPE_GLOBAL), "flushing the in-memory output");
  const ssize_t n = H5Fget_file_image(file.get(), nullptr, 0);
  if (n < 0) throw InternalError("cannot size the in-memory HDF5 file (" + last_error() + ")");
  std::string bytes(static_cast<std::size_t>(n), '\0');
  if (H5Fget_file_image(file.get(), bytes.data(), bytes.size()) != n)
    throw InternalError("cannot copy the in-memory HDF5 file (" + last_error() + ")");
  file.reset();
  target.write_and_commit(bytes);
}

bool exists(hid_t loc, const std::string& path) {
  // Walk the path one link at a time: H5Lexists fails on a missing parent.
  std::string prefix;
  std::stringstream ss(path);
  std::string part;
  while (std::getline(ss, part, '/')) {
    if (part.empty()) continue;
    prefix += (prefix.empty() ? "" : "/") + part;
    if (H5Lexists(loc, prefix.c_str(), H5P_DEFAULT) <= 0) return false;
  }
  return true;
}

bool attr_exists(hid_t loc, const std::string& name) { return H5Aexists(loc, name.c_str()) > 0; }

Id open_group(hid_t loc, const std::string& path, const std::string& file) {
  if (!exists(loc, path)) throw InputError(file + ": missing group '" + path + "' (see docs/catalogue.md)");
  Id g(H5Gopen2(loc, path.c_str(), H5P_DEFAULT));
  if (!g) throw InputError(file + ": '" + path + "' is not a group: " + last_error());
  return g;
}

Id open_dataset(hid_t loc, const std::string& path, const std::string& file) {
  if (!exists(loc, path)) throw InputError(file + ": missing dataset '" + path + "' (see docs/catalogue.md)");
  Id d(H5Dopen2(loc, path.c_str(), H5P_DEFAULT));
  if (!d) throw InputError(file + ": '" + path + "' is not a dataset: " + last_error());
  return d;
}

namespace {
herr_t collect_link(hid_t, const char* name, const H5L_info_t*, void* data) {
  static_cast<std::vector<std::string>*>(data)->emplace_back(name);
  return 0;
}
herr_t collect_attr(hid_t, const char* name, const H5A_info_t*, void* data) {
  static_cast<std::vector<std::string>*>(data)->emplace_back(name);
  return 0;
}
}  // namespace

std::vector<std::string> children(hid_t loc) {
  std::vector<std::string> out;
  H5Literate(loc, H5_INDEX_NAME, H5_ITER_INC, nullptr, collect_link, &out);
  std::sort(out.begin(), out.end());
  return out;
}

std::vector<std::string> attr_names(hid_t loc) {
  std::vector<std::string> out;
  H5Aiterate2(loc, H5_INDEX_NAME, H5_ITER_INC, nullptr, collect_attr, &out);
  return out;
}

std::vector<hsize_t> shape(hid_t dataset) {
  Id space(H5Dget_space(dataset));
  const int rank = H5Sget_simple_extent_ndims(space.get());
  std::vector<hsize_t> dims(static_cast<std::size_t>(std::max(rank, 0)));
  if (rank > 0) H5Sget_simple_extent_dims(space.get(), dims.data(), nullptr);
  return dims;
}

std::vector<double> read_doubles(hid_t loc, const std::string& path, const std::string& file) {
  return read_numeric<double>(loc, path, file, H5T_NATIVE_DOUBLE);
}

std::vector<std::int64_t> read_ints(hid_t loc, const std::string& path, const std::string& file) {
  return read_numeric<std::int64_t>(loc, path, file, H5T_NATIVE_INT64);
}

std::vector<std::string> read_strings(hid_t loc, const std::string& path, const std::string& file) {
  Id ds = open_dataset(loc, path, file);
  Id type(H5Dget_type(ds.get()));
  if (H5Tget_class(type.get()) != H5T_STRING)
    throw InputError(file + ": dataset '" + path + "' is not a string dataset (see docs/catalogue.md)");
  hsize_t n = 1;
  for (hsize_t d : shape(ds.get())) n *= d;
  std::vector<std::string> out;
  out.reserve(n);
  if (n == 0) return out;
  // Memory types take the file's character set: HDF5 will not convert
  // between ASCII and UTF-8 strings.
  const H5T_cset_t cset = H5Tget_cset(type.get());
  if (H5Tis_variable_str(type.get()) > 0) {
    Id mem = string_type();
    H5Tset_cset(mem.get(), cset);
    std::vector<char*> raw(n, nullptr);
    check(H5Dread(ds.get(), mem.get(), H5S_ALL, H5S_ALL, H5P_DEFAULT, raw.data()), file + ": reading '" + path + "'");
    for (char* s : raw) out.emplace_back(s ? s : "");
    Id space(H5Dget_space(ds.get()));
    H5Dvlen_reclaim(mem.get(), space.get(), H5P_DEFAULT, raw.data());
  } else {
    const std::size_t width = H5Tget_size(type.get());
    Id mem(H5Tcopy(H5T_C_S1));
    H5Tset_size(mem.get(), width);
    H5Tset_strpad(mem.get(), H5T_STR_NULLPAD);
    H5Tset_cset(mem.get(), cset);
    std::vector<char> raw(n * width);
    check(H5Dread(ds.get(), mem.get(), H5S_ALL, H5S_ALL, H5P_DEFAULT, raw.data()), file + ": reading '" + path + "'");
    for (hsize_t i = 0; i < n; ++i) {
      const char* s = raw.data() + i * width;
      out.emplace_back(s, strnlen(s, width));
    }
  }
  // Trailing blanks from space-padded writers carry no meaning.
  for (auto& s : out) s.erase(s.find_last_not_of(' ') + 1);
  return out;
}

void read_row3(hid_t dataset, hsize_t row, std::vector<double>& out, const std::string& what) {
  Id space(H5Dget_space(dataset));
  hsize_t dims[3];
  H5Sget_simple_extent_dims(space.get(), dims, nullptr);
  const hsize_t start[3] = {row, 0, 0};
  const hsize_t count[3] = {1, dims[1], dims[2]};
  check(H5Sselect_hyperslab(space.get(), H5S_SELECT_SET, start, nullptr, count, nullptr), what);
  Id mem(H5Screate_simple(3, count, nullptr));
  out.resize(dims[1] * dims[2]);
  check(H5Dread(dataset, H5T_NATIVE_DOUBLE, mem.get(), space.get(), H5P_DEFAULT, out.data()), what);
}

std::string attr_text(hid_t loc, const std::string& name) {
  if (!attr_exists(loc, name)) return {};
  Id a(H5Aopen(loc, name.c_str(), H5P_DEFAULT));
  Id type(H5Aget_type(a.get()));
  Id space(H5Aget_space(a.get()));
  const hssize_t n = H5Sget_simple_extent_npoints(space.get());
  if (n <= 0) return {};
  std::ostringstream os;
  switch (H5Tget_class(type.get())) {
    case H5T_STRING: {
      if (H5Tis_variable_str(type.get()) > 0) {
        Id mem = string_type();
        H5Tset_cset(mem.get(), H5Tget_cset(type.get()));
        std::vector<char*> raw(static_cast<std::size_t>(n), nullptr);
        if (H5Aread(a.get(), mem.get(), raw.data()) < 0) return {};
        for (hssize_t i = 0; i < n; ++i) os << (i ? "," : "") << (raw[i] ? raw[i] : "");
        H5Dvlen_reclaim(mem.get(), space.get(), H5P_DEFAULT, raw.data());
      } else {
        const std::size_t width = H5Tget_size(type.get());
        std::vector<char> raw(static_cast<std::size_t>(n) * width);
        if (H5Aread(a.get(), type.get(), raw.data()) < 0) return {};
        for (hssize_t i = 0; i < n; ++i) {
          const char* s = raw.data() + static_cast<std::size_t>(i) * width;
          os << (i ? "," : "") << std::string(s, strnlen(s, width));
        }
      }
      break;
    }
    case H5T_INTEGER:
    case H5T_ENUM: {  // h5py stores booleans as an enum over int8
      std::vector<long long> v(static_cast<std::size_t>(n));
      if (H5Aread(a.get(), H5T_NATIVE_LLONG, v.data()) < 0) return {};
      for (hssize_t i = 0; i < n; ++i) os << (i ? "," : "") << v[i];
      break;
    }
    case H5T_FLOAT: {
      std::vector<double> v(static_cast<std::size_t>(n));
      if (H5Aread(a.get(), H5T_NATIVE_DOUBLE, v.data()) < 0) return {};
      os.precision(17);
      for (hssize_t i = 0; i < n; ++i) os << (i ? "," : "") << v[i];
      break;
    }
    default: return {};
  }
  return os.str();
}

void write_doubles(hid_t loc, const std::string& name, const std::vector<double>& v,
                   const std::vector<hsize_t>& dims) {
  Id space = make_space(dims);
  Id ds(H5Dcreate2(loc, name.c_str(), H5T_IEEE_F64LE, space.get(), H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT));
  if (!ds) throw IoError("cannot create dataset '" + name + "': " + last_error());
  if (!v.empty()) check(H5Dwrite(ds.get(), H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, v.data()), "writing " + name);
}

void write_ints(hid_t loc, const std::string& name, const std::vector<std::int64_t>& v,
                const std::vector<hsize_t>& dims) {
  Id space = make_space(dims);
  Id ds(H5Dcreate2(loc, name.c_str(), H5T_STD_I64LE, space.get(), H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT));
  if (!ds) throw IoError("cannot create dataset '" + name + "': " + last_error());
  if (!v.empty()) check(H5Dwrite(ds.get(), H5T_NATIVE_INT64, H5S_ALL, H5S_ALL, H5P_DEFAULT, v.data()), "writing " + name);
}

void write_strings(hid_t loc, const std::string& name, const std::vector<std::string>& v) {
  Id type = string_type();
  Id space = make_space({v.size()});
  Id ds(H5Dcreate2(loc, name.c_str(), type.get(), space.get(), H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT));
  if (!ds) throw IoError("cannot create dataset '" + name + "': " + last_error());
  std::vector<const char*> ptrs;
  for (const auto& s : v) ptrs.push_back(s.c_str());
  if (!v.empty()) check(H5Dwrite(ds.get(), type.get(), H5S_ALL, H5S_ALL, H5P_DEFAULT, ptrs.data()), "writing " + name);
}

namespace {
void write_attr_raw(hid_t loc, const std::string& name, hid_t file_type, hid_t mem_type,
                    const std::vector<hsize_t>& dims, const void* data) {
  if (attr_exists(loc, name)) H5Adelete(loc, name.c_str());
  Id space = make_space(dims);
  Id a(H5Acreate2(loc, name.c_str(), file_type, space.get(), H5P_DEFAULT, H5P_DEFAULT));
  if (!a) throw IoError("cannot create attribute '" + name + "': " + last_error());
  check(H5Awrite(a.get(), mem_type, data), "writing attribute " + name);
}
}  // namespace

void write_attr(hid_t loc, const std::string& name, const std::string& value) {
  Id type = string_type();
  const char* p = value.c_str();
  write_attr_raw(loc, name, type.get(), type.get(), {}, &p);
}
void write_attr(hid_t loc, const std::string& name, double value) {
  write_attr_raw(loc, name, H5T_IEEE_F64LE, H5T_NATIVE_DOUBLE, {}, &value);
}
void write_attr(hid_t loc, const std::string& name, std::int64_t value) {
  write_attr_raw(loc, name, H5T_STD_I64LE, H5T_NATIVE_INT64, {}, &value);
}
void write_attr(hid_t loc, const std::string& name, const std::vector<std::string>& values) {
  Id type = string_type();
  std::vector<const char*> ptrs;
  for (const auto& s : values) ptrs.push_back(s.c_str());
  write_attr_raw(loc, name, type.get(), type.get(), {values.size()}, ptrs.data());
}
void write_attr(hid_t loc, const std::string& name, const std::vector<double>& values) {
  write_attr_raw(loc, name, H5T_IEEE_F64LE, H5T_NATIVE_DOUBLE, {values.size()}, values.data());
}

Id create_group(hid_t loc, const std::string& name) {
  Id g(H5Gcreate2(loc, name.c_str(), H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT));
  if (!g) throw IoError("cannot create group '" + name + "': " + last_error());
  return g;
}

void copy_attributes(hid_t from, hid_t to) {
  for (const auto& name : attr_names(from)) {
    Id a(H5Aopen(from, name.c_str(), H5P_DEFAULT));
    Id type(H5Aget_type(a.get()));
    Id space(H5Aget_space(a.get()));
    const std::size_t n = static_cast<std::size_t>(std::max<hssize_t>(H5Sget_simple_extent_npoints(space.get()), 0));
    std::vector<unsigned char> buf(std::max<std::size_t>(n, 1) * H5Tget_size(type.get()));
    if (H5Aread(a.get(), type.get(), buf.data()) < 0) continue;  // unreadable provenance is skipped, not fatal
    Id b(H5Acreate2(to, name.c_str(), type.get(), space.get(), H5P_DEFAULT, H5P_DEFAULT));
    if (b) H5Awrite(b.get(), type.get(), buf.data());
    if (H5Tdetect_class(type.get(), H5T_VLEN) > 0 || H5Tis_variable_str(type.get()) > 0)
      H5Dvlen_reclaim(type.get(), space.get(), H5P_DEFAULT, buf.data());
  }
}

}  // namespace spinflip::analysis::h5
