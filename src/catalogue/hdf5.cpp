#include "catalogue/hdf5.hpp"

#include <cstring>

#include "core/errors.hpp"

namespace spinflip::catalogue::h5 {

namespace {

herr_t collect(unsigned n, const H5E_error2_t* e, void* data) {
  auto* text = static_cast<std::string*>(data);
  if (n > 2) return 0;  // the innermost few frames say what went wrong
  if (!text->empty()) text->append("; ");
  text->append(e->func_name ? e->func_name : "?");
  text->append(": ");
  text->append(e->desc ? e->desc : "");
  return 0;
}

}  // namespace

std::string error_stack_text() {
  std::string text;
  H5Ewalk2(H5E_DEFAULT, H5E_WALK_UPWARD, collect, &text);
  H5Eclear2(H5E_DEFAULT);
  return text.empty() ? "no HDF5 error recorded" : text;
}

void fail(const char* expression, const std::source_location& loc) {
  throw InternalError(std::string("HDF5 call failed: ") + expression + " (" + error_stack_text() + ") at " +
                      where(loc));
}

void Handle::close(const std::source_location& loc) {
  if (id_ < 0) return;
  hid_t id = std::exchange(id_, H5I_INVALID_HID);
  if (closer_(id) < 0) fail("H5?close", loc);
}

void silence_errors() { H5Eset_auto2(H5E_DEFAULT, nullptr, nullptr); }

Handle simple_space(const std::vector<hsize_t>& d) {
  if (d.empty()) return dataspace(SPINFLIP_H5_ID(H5Screate(H5S_SCALAR)));
  return dataspace(SPINFLIP_H5_ID(H5Screate_simple(static_cast<int>(d.size()), d.data(), nullptr)));
}

Handle fixed_string_type(std::size_t size) {
  Handle t = datatype(SPINFLIP_H5_ID(H5Tcopy(H5T_C_S1)));
  SPINFLIP_H5(H5Tset_size(t, size));
  SPINFLIP_H5(H5Tset_strpad(t, H5T_STR_NULLPAD));
  SPINFLIP_H5(H5Tset_cset(t, H5T_CSET_UTF8));
  return t;
}

Handle vlen_string_type() {
  Handle t = datatype(SPINFLIP_H5_ID(H5Tcopy(H5T_C_S1)));
  SPINFLIP_H5(H5Tset_size(t, H5T_VARIABLE));
  SPINFLIP_H5(H5Tset_cset(t, H5T_CSET_UTF8));
  return t;
}

namespace {
void write_plain(hid_t object, const std::string& name, hid_t type, const std::vector<hsize_t>& d,
                 const void* data) {
  Handle space = simple_space(d);
  Handle a = attribute(SPINFLIP_H5_ID(H5Acreate2(object, name.c_str(), type, space, H5P_DEFAULT, H5P_DEFAULT)));
  if (!d.empty() && d[0] == 0) return;  // an empty array: nothing to write
  SPINFLIP_H5(H5Awrite(a, type, data));
}
}  // namespace

void write_attribute(hid_t object, const std::string& name, const std::string& value) {
  Handle t = vlen_string_type();
  const char* p = value.c_str();
  write_plain(object, name, t, {}, &p);
}

void write_attribute(hid_t object, const std::string& name, const std::vector<std::string>& value) {
  Handle t = vlen_string_type();
  std::vector<const char*> p;
  for (const auto& s : value) p.push_back(s.c_str());
  write_plain(object, name, t, {value.size()}, p.data());
}

void write_attribute(hid_t object, const std::string& name, double value) {
  write_plain(object, name, H5T_NATIVE_DOUBLE, {}, &value);
}
void write_attribute(hid_t object, const std::string& name, std::int64_t value) {
  write_plain(object, name, H5T_NATIVE_INT64, {}, &value);
}
void write_attribute(hid_t object, const std::string& name, const std::vector<double>& value) {
  write_plain(object, name, H5T_NATIVE_DOUBLE, {value.size()}, value.data());
}
void write_attribute(hid_t object, const std::string& name, const std::vector<std::int64_t>& value) {
  write_plain(object, name, H5T_NATIVE_INT64, {value.size()}, value.data());
}

bool has_attribute(hid_t object, const std::string& name) {
  return SPINFLIP_H5(H5Aexists(object, name.c_str())) > 0;
}

std::vector<std::string> read_strings_attribute(hid_t object, const std::string& name) {
  Handle a = attribute(SPINFLIP_H5_ID(H5Aopen(object, name.c_str(), H5P_DEFAULT)));
  Handle ftype = datatype(SPINFLIP_H5_ID(H5Aget_type(a)));
  if (H5Tget_class(ftype) != H5T_STRING)
    throw IoError("attribute '" + name + "' is not a string");
  Handle space = dataspace(SPINFLIP_H5_ID(H5Aget_space(a)));
  auto n = static_cast<std::size_t>(SPINFLIP_H5(static_cast<herr_t>(H5Sget_simple_extent_npoints(space))));
  std::vector<std::string> out;
  if (H5Tis_variable_str(ftype) > 0) {
    Handle t = vlen_string_type();
    std::vector<char*> p(n, nullptr);
    SPINFLIP_H5(H5Aread(a, t, p.data()));
    for (char* s : p) out.emplace_back(s ? s : "");
    H5Dvlen_reclaim(t, space, H5P_DEFAULT, p.data());
  } else {
    std::size_t size = H5Tget_size(ftype);
    Handle t = fixed_string_type(size);
    std::vector<char> buf(n * size);
    SPINFLIP_H5(H5Aread(a, t, buf.data()));
    for (std::size_t i = 0; i < n; ++i) out.emplace_back(buf.data() + i * size, strnlen(buf.data() + i * size, size));
  }
  return out;
}

std::string read_string_attribute(hid_t object, const std::string& name) {
  auto v = read_strings_attribute(object, name);
  return v.empty() ? std::string() : v.front();
}

std::int64_t read_int_attribute(hid_t object, const std::string& name) {
  Handle a = attribute(SPINFLIP_H5_ID(H5Aopen(object, name.c_str(), H5P_DEFAULT)));
  std::int64_t v = 0;
  SPINFLIP_H5(H5Aread(a, H5T_NATIVE_INT64, &v));
  return v;
}

std::vector<hsize_t> dims(hid_t ds) {
  Handle space = dataspace(SPINFLIP_H5_ID(H5Dget_space(ds)));
  int rank = SPINFLIP_H5(H5Sget_simple_extent_ndims(space));
  std::vector<hsize_t> d(static_cast<std::size_t>(rank));
  if (rank > 0) SPINFLIP_H5(H5Sget_simple_extent_dims(space, d.data(), nullptr));
  return d;
}

}  // namespace spinflip::catalogue::h5
