// Internal: move-only owners of HDF5 ids and the few typed reads/writes the
// analysis verbs need. Every failure names the file and object and becomes an
// IoError/InputError (a user's file is wrong) — never a silent default.
#pragma once
#include <hdf5.h>

#include <cstdint>
#include <string>
#include <vector>

#include "core/output_file.hpp"

namespace spinflip::analysis::h5 {

/// Owns one HDF5 id; closes it with the matching H5?close.
class Id {
 public:
  Id() = default;
  explicit Id(hid_t id) : id_(id) {}
  Id(const Id&) = delete;
  Id& operator=(const Id&) = delete;
  Id(Id&& o) noexcept : id_(o.id_) { o.id_ = H5I_INVALID_HID; }
  Id& operator=(Id&& o) noexcept {
    if (this != &o) {
      reset();
      id_ = o.id_;
      o.id_ = H5I_INVALID_HID;
    }
    return *this;
  }
  ~Id() { reset(); }
  hid_t get() const { return id_; }
  explicit operator bool() const { return id_ >= 0; }
  void reset();

 private:
  hid_t id_ = H5I_INVALID_HID;
};

/// Silence HDF5's own stack printing once; we decode errors ourselves.
void quiet_errors();
/// The innermost HDF5 error message on the current stack (for messages).
std::string last_error();

/// Open read-only; a missing or non-HDF5 file is an IoError naming the path.
Id open_read(const std::string& path);
/// Create/truncate for writing; refuses unwritable paths with IoError.
Id create_file(const std::string& path);
/// An HDF5 file held in memory (the core driver, no backing store): nothing
/// reaches the disk until save_file, so a failure half way writes nothing.
Id create_memory_file();
/// Close a file from create_memory_file and write its bytes through `target`
/// (checked, then renamed over the target).
void save_file(Id& file, core::OutputFile& target);

bool exists(hid_t loc, const std::string& path);
bool attr_exists(hid_t loc, const std::string& name);
Id open_group(hid_t loc, const std::string& path, const std::string& file);
Id open_dataset(hid_t loc, const std::string& path, const std::string& file);
/// Group names directly under loc, sorted.
std::vector<std::string> children(hid_t loc);
std::vector<std::string> attr_names(hid_t loc);

/// Shape of a dataset.
std::vector<hsize_t> shape(hid_t dataset);

// Whole-dataset reads converted to the native type by HDF5 (which refuses,
// e.g., strings as numbers — reported as an InputError naming the object).
std::vector<double> read_doubles(hid_t loc, const std::string& path, const std::string& file);
std::vector<std::int64_t> read_ints(hid_t loc, const std::string& path, const std::string& file);
/// Fixed-length or variable-length string datasets alike.
std::vector<std::string> read_strings(hid_t loc, const std::string& path, const std::string& file);
/// Rows [row, row+1) of a 3D double dataset: n_units × n_coeff values.
void read_row3(hid_t dataset, hsize_t row, std::vector<double>& out, const std::string& what);

/// Attribute as text (numbers formatted, strings as is); empty when absent.
std::string attr_text(hid_t loc, const std::string& name);

// Writers (the analysis outputs are small; contiguous datasets).
void write_doubles(hid_t loc, const std::string& name, const std::vector<double>& v,
                   const std::vector<hsize_t>& dims);
void write_ints(hid_t loc, const std::string& name, const std::vector<std::int64_t>& v,
                const std::vector<hsize_t>& dims);
void write_strings(hid_t loc, const std::string& name, const std::vector<std::string>& v);
void write_attr(hid_t loc, const std::string& name, const std::string& value);
void write_attr(hid_t loc, const std::string& name, double value);
void write_attr(hid_t loc, const std::string& name, std::int64_t value);
void write_attr(hid_t loc, const std::string& name, const std::vector<std::string>& values);
void write_attr(hid_t loc, const std::string& name, const std::vector<double>& values);
Id create_group(hid_t loc, const std::string& name);
/// Copy every attribute of `from` onto `to` with its type and shape (provenance).
void copy_attributes(hid_t from, hid_t to);

}  // namespace spinflip::analysis::h5
