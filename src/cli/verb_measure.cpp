// spinflip measure INPUT --stats FILE -o OUT.h5 [--cell-mpc C]: the [stats.*]
// kernels on a user's own 2D or 3D array (.npy, or an HDF5 dataset as
// file.h5:/path), written as <kernel>/values (n_units × n_coeff) plus axis
// datasets and the kernel's configuration as attributes (DESIGN.md §7).
// A 2D array is one unit; for a 3D array (axis 2 = line of sight) chunk
// kernels measure the whole cube and slice kernels every slice along axis 2.
#include <hdf5.h>

#include <atomic>
#include <filesystem>
#include <iostream>
#include <thread>

#include "catalogue/describe.hpp"
#include "cli/verbs.hpp"
#include "core/errors.hpp"
#include "core/log.hpp"
#include "core/output_file.hpp"
#include "core/version.hpp"
#include "stats/npy.hpp"
#include "stats/stats.hpp"
#include "fft/planning.hpp"

namespace spinflip::cli {
namespace {

/// Move-only owner of an HDF5 id.
class H5Id {
 public:
  H5Id(hid_t id, herr_t (*close)(hid_t), const std::string& what) : id_(id), close_(close) {
    if (id < 0) throw IoError(what);
  }
  H5Id(H5Id&& o) noexcept : id_(o.id_), close_(o.close_) { o.id_ = -1; }
  H5Id(const H5Id&) = delete;
  H5Id& operator=(const H5Id&) = delete;
  ~H5Id() {
    if (id_ >= 0) close_(id_);
  }
  operator hid_t() const { return id_; }

 private:
  hid_t id_;
  herr_t (*close_)(hid_t);
};

void h5_check(herr_t status, const std::string& what) {
  if (status < 0) throw IoError(what);
}

struct Field {
  std::vector<std::size_t> shape;
  std::vector<float> data;
};

Field read_hdf5(const std::string& file, const std::string& dataset, const std::string& spec) {
  if (!std::filesystem::exists(file)) throw IoError(spec + ": file " + file + " does not exist");
  H5Id f(H5Fopen(file.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT), H5Fclose, spec + ": cannot open " + file + " as HDF5");
  if (H5Lexists(f, dataset.c_str(), H5P_DEFAULT) <= 0)
    throw InputError(spec + ": no dataset " + dataset + " in " + file);
  H5Id d(H5Dopen2(f, dataset.c_str(), H5P_DEFAULT), H5Dclose, spec + ": " + dataset + " is not a dataset");
  H5Id type(H5Dget_type(d), H5Tclose, spec + ": cannot read the datatype");
  if (H5Tget_class(type) != H5T_FLOAT && H5Tget_class(type) != H5T_INTEGER)
    throw InputError(spec + ": dataset type is not numeric (float32/float64 expected)");
  H5Id space(H5Dget_space(d), H5Sclose, spec + ": cannot read the dataspace");
  const int rank = H5Sget_simple_extent_ndims(space);
  if (rank < 1 || rank > 8) throw InputError(spec + ": dataset rank " + std::to_string(rank) + " is not supported");
  std::vector<hsize_t> dims(static_cast<std::size_t>(rank));
  H5Sget_simple_extent_dims(space, dims.data(), nullptr);
  Field out;
  std::size_t n = 1;
  for (auto v : dims) out.shape.push_back(v), n *= v;
  out.data.resize(n);
  h5_check(H5Dread(d, H5T_NATIVE_FLOAT, H5S_ALL, H5S_ALL, H5P_DEFAULT, out.data.data()),
           spec + ": reading the dataset failed");
  return out;
}

Field read_input(const std::string& spec) {
  // file.h5:/path names an HDF5 dataset; anything else is a .npy file.
  const auto colon = spec.rfind(":/");
  if (colon != std::string::npos && colon > 0) return read_hdf5(spec.substr(0, colon), spec.substr(colon + 1), spec);
  if (!std::filesystem::exists(spec)) throw IoError(spec + ": input file does not exist");
  auto a = stats::read_npy(spec);
  return {std::move(a.shape), std::move(a.data)};
}

void write_attribute(hid_t obj, const std::string& name, const core::Value& v) {
  auto scalar = [&](hid_t type, const void* p, std::size_t count) {
    hsize_t n = count;
    H5Id space(count == 1 ? H5Screate(H5S_SCALAR) : H5Screate_simple(1, &n, nullptr), H5Sclose, "attribute space");
    H5Id a(H5Acreate2(obj, name.c_str(), type, space, H5P_DEFAULT, H5P_DEFAULT), H5Aclose, "attribute " + name);
    if (count > 0) h5_check(H5Awrite(a, type, p), "writing attribute " + name);
  };
  if (auto* i = std::get_if<std::int64_t>(&v)) return scalar(H5T_NATIVE_INT64, i, 1);
  if (auto* d = std::get_if<double>(&v)) return scalar(H5T_NATIVE_DOUBLE, d, 1);
  if (auto* b = std::get_if<bool>(&v)) {
    const std::int8_t x = *b ? 1 : 0;  // h5py reads it as a number; 0/1 is unambiguous
    return scalar(H5T_NATIVE_INT8, &x, 1);
  }
  if (auto* dv = std::get_if<std::vector<double>>(&v)) {
    if (dv->empty()) return scalar(H5T_NATIVE_DOUBLE, nullptr, 0);
    return scalar(H5T_NATIVE_DOUBLE, dv->data(), dv->size());
  }
  if (auto* iv = std::get_if<std::vector<std::int64_t>>(&v)) {
    if (iv->empty()) return scalar(H5T_NATIVE_INT64, nullptr, 0);
    return scalar(H5T_NATIVE_INT64, iv->data(), iv->size());
  }
  H5Id str(H5Tcopy(H5T_C_S1), H5Tclose, "string type");
  H5Tset_size(str, H5T_VARIABLE);
  H5Tset_cset(str, H5T_CSET_UTF8);
  if (auto* s = std::get_if<std::string>(&v)) {
    const char* p = s->c_str();
    return scalar(str, &p, 1);
  }
  const auto& sv = std::get<std::vector<std::string>>(v);
  std::vector<const char*> ptrs;
  for (auto& s : sv) ptrs.push_back(s.c_str());
  scalar(str, ptrs.data(), ptrs.size());
}

template <class T>
void write_dataset(hid_t loc, const std::string& name, const std::vector<T>& v, std::vector<hsize_t> dims,
                   hid_t type) {
  H5Id space(H5Screate_simple(static_cast<int>(dims.size()), dims.data(), nullptr), H5Sclose, "dataspace " + name);
  H5Id d(H5Dcreate2(loc, name.c_str(), type, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT), H5Dclose,
         "creating dataset " + name);
  if (!v.empty()) h5_check(H5Dwrite(d, type, H5S_ALL, H5S_ALL, H5P_DEFAULT, v.data()), "writing dataset " + name);
}

int run_measure(const std::string& input, const std::string& stats_file, const std::string& output, double cell_mpc,
                int threads) {
  H5Eset_auto2(H5E_DEFAULT, nullptr, nullptr);  // errors are reported as spinflip errors instead
  core::Schema schema;
  stats::declare_keys(schema);
  fft::declare_keys(schema);  // a stats file may say how FFT plans are made ([fft])
  if (!std::filesystem::exists(stats_file)) throw IoError(stats_file + ": stats file does not exist");
  const auto config = core::Config::from_file(stats_file, schema);
  const auto kernels = stats::kernels_from(config);
  if (kernels.empty())
    throw ConfigError(stats_file + ": no [stats.*] kernel table (power, slice_power, cylindrical, scattering, scattering3d, "
                                   "bispectrum, slice_bispectrum, moments, chunk_moments)");

  Field field = read_input(input);
  if (field.shape.size() != 2 && field.shape.size() != 3) {
    std::string s;
    for (auto v : field.shape) s += (s.empty() ? "" : ", ") + std::to_string(v);
    throw InputError(input + ": array of shape (" + s + ") has " + std::to_string(field.shape.size()) +
                     " dimensions; measure takes a 2D slice or a 3D cube (axis 2 = line of sight)");
  }
  stats::check_finite(field.data.data(), field.data.size(), input);

  const bool cube = field.shape.size() == 3;
  stats::Geometry whole{field.shape, {cell_mpc, cell_mpc, cell_mpc}};
  stats::Geometry slice{{field.shape[0], field.shape[1]}, {cell_mpc, cell_mpc, cell_mpc}};
  // Validate every kernel against its unit before measuring anything.
  for (const auto& k : kernels) {
    if (k->unit_kind() == stats::UnitKind::chunk && !cube)
      throw InputError(input + ": [stats." + k->name() + "] measures 3D chunks, but the array is 2D" +
                       (k->name() == "power" ? "; for the 2D power spectrum of a slice use [stats.slice_power]"
                        : k->name() == "bispectrum" ? "; for a slice use [stats.slice_bispectrum]"
                        : k->name() == "chunk_moments" ? "; for a slice use [stats.moments]" : ""));
    k->check(k->unit_kind() == stats::UnitKind::chunk || !cube ? whole : slice);
  }

  // One kernel's coefficients of unit u (a slice of a cube, or the whole array).
  const auto unit_values = [&](const stats::Kernel& k, std::size_t u) {
    const bool per_slice = cube && k.unit_kind() == stats::UnitKind::slice;
    const stats::Geometry& g = per_slice ? slice : whole;
    if (!per_slice) return k.measure(field.data.data(), g);
    const std::size_t n0 = field.shape[0], n1 = field.shape[1], n2 = field.shape[2];
    std::vector<float> s(n0 * n1);
    for (std::size_t i = 0; i < n0 * n1; ++i) s[i] = field.data[i * n2 + u];
    return k.measure(s.data(), g);
  };
  // Measured plans, made on the first unit of each kernel and kept in the user's
  // wisdom cache for the next call (docs/driver.md, "FFT plans").
  fft::set_planning(fft::planning_from(config));
  const fft::SharedWisdom wisdom = fft::share_wisdom(MPI_COMM_SELF, std::nullopt, fft::wisdom_cache_from(config), [&] {
    for (const auto& k : kernels) (void)unit_values(*k, 0);
  });


  // Written whole or not at all: the file is built in memory (HDF5's core
  // driver) and written out at the end, so a failing kernel or a full disk
  // leaves no partial file and a previous output as it was.
  core::OutputFile target(output);
  H5Id fapl(H5Pcreate(H5P_FILE_ACCESS), H5Pclose, "file access list");
  h5_check(H5Pset_fapl_core(fapl, 1 << 20, false), "in-memory output file");
  H5Id file(H5Fcreate("spinflip-measure-output", H5F_ACC_TRUNC, H5P_DEFAULT, fapl), H5Fclose,
            output + ": cannot create the output file in memory");
  write_attribute(file, "tool_version", std::string(tool_version));
  write_attribute(file, "git_revision", std::string(git_revision));
  write_attribute(file, "input", input);
  write_attribute(file, "input_shape",
                  std::vector<std::int64_t>(field.shape.begin(), field.shape.end()));
  write_attribute(file, "cell_mpc", cell_mpc);
  write_attribute(file, "stats_file", stats_file);
  write_attribute(file, "stats_text", config.text());
  write_attribute(file, "fft_wisdom_sha256", wisdom.sha256);

  for (const auto& k : kernels) {
    const bool per_slice = cube && k->unit_kind() == stats::UnitKind::slice;
    const stats::Geometry& g = per_slice ? slice : whole;
    const std::size_t n_units = per_slice ? field.shape[2] : 1, n_coeff = k->n_coeff(g);
    std::vector<double> values(n_units * n_coeff);
    auto run_unit = [&](std::size_t u) {
      const std::vector<double> c = unit_values(*k, u);
      if (c.size() != n_coeff) throw InternalError("stats." + k->name() + ": coefficient count mismatch");
      std::copy(c.begin(), c.end(), values.begin() + static_cast<std::ptrdiff_t>(u * n_coeff));
    };
    const std::size_t n_threads = std::min<std::size_t>(static_cast<std::size_t>(std::max(1, threads)), n_units);
    if (n_threads <= 1) {
      for (std::size_t u = 0; u < n_units; ++u) run_unit(u);
    } else {
      // Units are independent and kernels hold no mutable state: a shared counter hands them out.
      std::atomic<std::size_t> next{0};
      std::vector<std::exception_ptr> errors(n_threads);
      std::vector<std::thread> pool;
      for (std::size_t t = 0; t < n_threads; ++t)
        pool.emplace_back([&, t] {
          try {
            for (std::size_t u; (u = next++) < n_units;) run_unit(u);
          } catch (...) {
            errors[t] = std::current_exception();
          }
        });
      for (auto& th : pool) th.join();
      for (auto& e : errors)
        if (e) std::rethrow_exception(e);
    }

    H5Id group(H5Gcreate2(file, k->name().c_str(), H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT), H5Gclose,
               output + ": cannot create group " + k->name());
    write_dataset(group, "values", values, {n_units, n_coeff}, H5T_NATIVE_DOUBLE);
    std::vector<std::int64_t> unit_index(n_units);
    for (std::size_t u = 0; u < n_units; ++u) unit_index[u] = static_cast<std::int64_t>(u);
    write_dataset(group, "unit_index", unit_index, {n_units}, H5T_NATIVE_INT64);
    for (const auto& axis : k->axes(g)) {
      if (auto* d = std::get_if<std::vector<double>>(&axis.values))
        write_dataset(group, axis.name, *d, {d->size()}, H5T_NATIVE_DOUBLE);
      else {
        const auto& iv = std::get<std::vector<std::int64_t>>(axis.values);
        write_dataset(group, axis.name, iv, {iv.size()}, H5T_NATIVE_INT64);
      }
    }
    {  // self-describing: units and a description on every dataset, axes as dimension scales
      const std::string k_units = cell_mpc > 0 ? "Mpc^-1" : "rad/pixel";
      std::vector<std::string> coeff_axes;
      for (const auto& axis : k->axes(g)) coeff_axes.push_back(axis.name);
      for (const auto& name : coeff_axes) {
        H5Id ds(H5Dopen2(group, name.c_str(), H5P_DEFAULT), H5Dclose, output + ": cannot reopen " + name);
        catalogue::annotate(ds, catalogue::describe_dataset(name, k_units));
      }
      H5Id ui(H5Dopen2(group, "unit_index", H5P_DEFAULT), H5Dclose, output + ": cannot reopen unit_index");
      catalogue::annotate(ui, catalogue::describe_dataset("unit_index", k_units));
      H5Id vals(H5Dopen2(group, "values", H5P_DEFAULT), H5Dclose, output + ": cannot reopen values");
      catalogue::annotate(vals, catalogue::describe_values(k->attributes()));
      catalogue::attach_scales(group, vals, 2, {"unit_index"}, coeff_axes);
    }
    for (const auto& [name, value] : k->attributes()) write_attribute(group, name, value);
    write_attribute(group, "unit", std::string(per_slice ? "slice along axis 2" : cube ? "whole cube" : "whole slice"));
    log::info("measure: {} on {} unit(s), {} coefficients each", k->name(), n_units, n_coeff);
  }
  h5_check(H5Fflush(file, H5F_SCOPE_GLOBAL), output + ": flushing the in-memory file");
  std::string bytes(static_cast<std::size_t>(std::max<ssize_t>(0, H5Fget_file_image(file, nullptr, 0))), '\0');
  if (bytes.empty() || H5Fget_file_image(file, bytes.data(), bytes.size()) != static_cast<ssize_t>(bytes.size()))
    throw InternalError(output + ": cannot copy the in-memory HDF5 file");
  target.write_and_commit(bytes);
  return 0;
}

RegisterVerb measure_verb(
    "measure", "apply the [stats.*] kernels to your own .npy or HDF5 array", 40, [](CLI::App& sub) -> VerbRun {
      auto input = std::make_shared<std::string>();
      auto stats_file = std::make_shared<std::string>();
      auto output = std::make_shared<std::string>();
      auto cell = std::make_shared<double>(0.0);
      auto threads = std::make_shared<int>(1);
      sub.add_option("input", *input, "2D or 3D array: file.npy (float32/float64) or file.h5:/dataset")->required();
      sub.add_option("--stats", *stats_file, "TOML file with [stats.*] tables")->required();
      sub.add_option("-o,--output", *output, "the HDF5 file written (required)")->required();
      sub.add_option("--cell-mpc", *cell, "cell size in comoving Mpc (default: none, k in radians per cell)")
          ->check(CLI::PositiveNumber);
      sub.add_option("--threads", *threads, "threads measuring slices concurrently")->check(CLI::Range(1, 256));
      return [=]() {
        if (world_rank() != 0) return 0;  // a serial verb: other ranks have nothing to do
        return run_measure(*input, *stats_file, *output, *cell, *threads);
      };
    });

}  // namespace
}  // namespace spinflip::cli
