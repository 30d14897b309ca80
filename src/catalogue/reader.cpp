// Serial reader of a catalogue (spinflip status, tools, tests). Opens the file
// read-only with the POSIX driver, so it also reads a file a run is writing.
#include <cstring>
#include <map>

#include "catalogue/catalogue.hpp"
#include "catalogue/hdf5.hpp"
#include "core/errors.hpp"

namespace spinflip::catalogue {

namespace fs = std::filesystem;
using h5::Handle;

namespace {

Handle open_readonly(const fs::path& path) {
  h5::silence_errors();
  std::error_code ec;
  if (!fs::exists(path, ec)) throw IoError("catalogue " + path.string() + " does not exist");
  Handle fapl = h5::plist(SPINFLIP_H5_ID(H5Pcreate(H5P_FILE_ACCESS)));
  SPINFLIP_H5(H5Pset_fapl_sec2(fapl));
  SPINFLIP_H5(H5Pset_file_locking(fapl, false, true));
  hid_t fid = H5Fopen(path.c_str(), H5F_ACC_RDONLY, fapl);
  if (fid < 0) throw IoError("cannot open catalogue " + path.string() + ": not an HDF5 file or unreadable");
  Handle file = h5::file(fid);
  if (!h5::has_attribute(file, "campaign_sha256"))
    throw IoError(path.string() + " is not a spinflip catalogue (no campaign_sha256 attribute)");
  return file;
}

template <class T>
std::vector<T> read_all(hid_t parent, const char* name, hid_t memtype, std::size_t per_element = 1) {
  Handle ds = h5::dataset(SPINFLIP_H5_ID(H5Dopen2(parent, name, H5P_DEFAULT)));
  hsize_t n = 1;
  for (auto d : h5::dims(ds)) n *= d;
  std::vector<T> out(n * per_element);
  if (n) SPINFLIP_H5(H5Dread(ds, memtype, H5S_ALL, H5S_ALL, H5P_DEFAULT, out.data()));
  return out;
}

}  // namespace

Summary summarise(const fs::path& path) {
  Handle file = open_readonly(path);
  Summary s;
  s.campaign_sha256 = h5::read_string_attribute(file, "campaign_sha256");
  if (h5::has_attribute(file, "campaign_name")) s.campaign_name = h5::read_string_attribute(file, "campaign_name");
  if (h5::has_attribute(file, "created_utc")) s.created_utc = h5::read_string_attribute(file, "created_utc");

  Handle entries = h5::group(SPINFLIP_H5_ID(H5Gopen2(file, "entries", H5P_DEFAULT)));
  auto status = read_all<std::int8_t>(entries, "status", H5T_NATIVE_INT8);
  auto point = read_all<std::int64_t>(entries, "point", H5T_NATIVE_INT64);
  auto realisation = read_all<std::int64_t>(entries, "realisation", H5T_NATIVE_INT64);
  Handle design = h5::group(SPINFLIP_H5_ID(H5Gopen2(file, "design", H5P_DEFAULT)));
  auto design_index = read_all<std::int32_t>(design, "design_index", H5T_NATIVE_INT32);
  s.n_entries = status.size();

  std::vector<char> errors;
  std::map<std::int32_t, DesignCount> per_design;
  for (std::size_t e = 0; e < status.size(); ++e) {
    auto p = static_cast<std::size_t>(point.at(e));
    std::int32_t d = p < design_index.size() ? design_index[p] : -1;
    DesignCount& c = per_design[d];
    c.design_index = d;
    if (status[e] == 1) {
      ++s.done, ++c.done;
    } else if (status[e] == 2) {
      ++s.failed, ++c.failed;
      if (errors.empty()) errors = read_all<char>(entries, "error", h5::fixed_string_type(error_text_bytes), error_text_bytes);
      const char* text = errors.data() + e * error_text_bytes;
      s.failures.push_back({e, point[e], realisation[e], std::string(text, strnlen(text, error_text_bytes))});
    } else {
      ++s.pending, ++c.pending;
    }
  }
  std::vector<std::string> names;
  if (h5::has_attribute(design, "designs")) names = h5::read_strings_attribute(design, "designs");
  for (auto& [d, c] : per_design) {
    if (d >= 0 && static_cast<std::size_t>(d) < names.size()) c.name = names[static_cast<std::size_t>(d)];
    s.designs.push_back(c);
  }

  Handle stats = h5::group(SPINFLIP_H5_ID(H5Gopen2(file, "stats", H5P_DEFAULT)));
  for (const auto& scenario : h5::read_strings_attribute(stats, "scenarios")) {
    Handle sg = h5::group(SPINFLIP_H5_ID(H5Gopen2(stats, scenario.c_str(), H5P_DEFAULT)));
    for (const auto& kernel : h5::read_strings_attribute(sg, "kernels")) {
      Handle kg = h5::group(SPINFLIP_H5_ID(H5Gopen2(sg, kernel.c_str(), H5P_DEFAULT)));
      Handle values = h5::dataset(SPINFLIP_H5_ID(H5Dopen2(kg, "values", H5P_DEFAULT)));
      auto d = h5::dims(values);
      s.kernels.push_back({scenario, kernel, h5::read_string_attribute(kg, "unit_kind"), d.at(1), d.at(2)});
    }
  }
  return s;
}

std::vector<double> read_values(const fs::path& path, const std::string& scenario, const std::string& kernel,
                                std::size_t entry) {
  Handle file = open_readonly(path);
  std::string name = "stats/" + scenario + "/" + kernel + "/values";
  if (H5Lexists(file, "stats", H5P_DEFAULT) <= 0 ||
      H5Oexists_by_name(file, name.c_str(), H5P_DEFAULT) <= 0)
    throw InputError("catalogue " + path.string() + " has no " + name);
  Handle ds = h5::dataset(SPINFLIP_H5_ID(H5Dopen2(file, name.c_str(), H5P_DEFAULT)));
  auto d = h5::dims(ds);
  if (entry >= d.at(0))
    throw InputError("catalogue " + path.string() + " has " + std::to_string(d[0]) + " entries, asked for entry " +
                     std::to_string(entry));
  Handle space = h5::dataspace(SPINFLIP_H5_ID(H5Dget_space(ds)));
  hsize_t start[3] = {entry, 0, 0}, count[3] = {1, d[1], d[2]};
  SPINFLIP_H5(H5Sselect_hyperslab(space, H5S_SELECT_SET, start, nullptr, count, nullptr));
  std::vector<double> out(d[1] * d[2]);
  Handle mem = h5::simple_space({out.size()});
  SPINFLIP_H5(H5Dread(ds, H5T_NATIVE_DOUBLE, mem, space, H5P_DEFAULT, out.data()));
  return out;
}

}  // namespace spinflip::catalogue
