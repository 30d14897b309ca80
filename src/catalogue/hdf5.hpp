// Internal: move-only owners of HDF5 C API ids and checked calls. Every id
// the catalogue opens lives in one of these, so error paths leak nothing.
#pragma once
#include <hdf5.h>

#include <cstdint>
#include <source_location>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace spinflip::catalogue::h5 {

/// The innermost messages of HDF5's error stack, for exception text.
std::string error_stack_text();

/// Throw InternalError naming the HDF5 call, its decoded error and the call site.
[[noreturn]] void fail(const char* expression, const std::source_location& loc);

inline hid_t check_id(hid_t id, const char* expression,
                      const std::source_location& loc = std::source_location::current()) {
  if (id < 0) fail(expression, loc);
  return id;
}
inline herr_t check(herr_t status, const char* expression,
                    const std::source_location& loc = std::source_location::current()) {
  if (status < 0) fail(expression, loc);
  return status;
}

#define SPINFLIP_H5_ID(expr) ::spinflip::catalogue::h5::check_id((expr), #expr)
#define SPINFLIP_H5(expr) ::spinflip::catalogue::h5::check((expr), #expr)

/// One HDF5 id and the function that closes it.
class Handle {
 public:
  using Closer = herr_t (*)(hid_t);
  Handle() = default;
  Handle(hid_t id, Closer closer) : id_(id), closer_(closer) {}
  Handle(const Handle&) = delete;
  Handle& operator=(const Handle&) = delete;
  Handle(Handle&& o) noexcept : id_(std::exchange(o.id_, H5I_INVALID_HID)), closer_(o.closer_) {}
  Handle& operator=(Handle&& o) noexcept {
    if (this != &o) {
      reset();
      id_ = std::exchange(o.id_, H5I_INVALID_HID);
      closer_ = o.closer_;
    }
    return *this;
  }
  ~Handle() { reset(); }
  /// Close now; a failed close is reported by the caller that needs it (close()).
  void reset() noexcept {
    if (id_ >= 0 && closer_) closer_(id_);
    id_ = H5I_INVALID_HID;
  }
  /// Forget the id without closing it (an unwinding rank must not enter a
  /// collective close that its peers never reach).
  void release() noexcept { id_ = H5I_INVALID_HID; }
  /// Close and throw if HDF5 reports an error (file close flushes metadata).
  void close(const std::source_location& loc = std::source_location::current());
  hid_t id() const { return id_; }
  operator hid_t() const { return id_; }
  explicit operator bool() const { return id_ >= 0; }

 private:
  hid_t id_ = H5I_INVALID_HID;
  Closer closer_ = nullptr;
};

inline Handle file(hid_t id) { return {id, H5Fclose}; }
inline Handle group(hid_t id) { return {id, H5Gclose}; }
inline Handle dataset(hid_t id) { return {id, H5Dclose}; }
inline Handle dataspace(hid_t id) { return {id, H5Sclose}; }
inline Handle datatype(hid_t id) { return {id, H5Tclose}; }
inline Handle plist(hid_t id) { return {id, H5Pclose}; }
inline Handle attribute(hid_t id) { return {id, H5Aclose}; }

/// Turn HDF5's automatic stack printing off (we decode errors ourselves).
void silence_errors();

/// Simple dataspace of the given dimensions (scalar when dims is empty).
Handle simple_space(const std::vector<hsize_t>& dims);
/// Fixed-length, NUL-padded C string type of `size` bytes.
Handle fixed_string_type(std::size_t size);
/// Variable-length UTF-8 string type (attributes).
Handle vlen_string_type();

// Attributes: written once at creation (collectively, identical on every rank).
void write_attribute(hid_t object, const std::string& name, const std::string& value);
void write_attribute(hid_t object, const std::string& name, const std::vector<std::string>& value);
void write_attribute(hid_t object, const std::string& name, double value);
void write_attribute(hid_t object, const std::string& name, std::int64_t value);
void write_attribute(hid_t object, const std::string& name, const std::vector<double>& value);
void write_attribute(hid_t object, const std::string& name, const std::vector<std::int64_t>& value);
bool has_attribute(hid_t object, const std::string& name);
std::string read_string_attribute(hid_t object, const std::string& name);
std::vector<std::string> read_strings_attribute(hid_t object, const std::string& name);
std::int64_t read_int_attribute(hid_t object, const std::string& name);

/// Dimensions of an open dataset.
std::vector<hsize_t> dims(hid_t dataset);

}  // namespace spinflip::catalogue::h5
