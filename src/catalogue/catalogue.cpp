// Parallel-HDF5 catalogue writer. Creation is collective and allocates every
// byte (contiguous layout, early allocation, fill values), then nothing but raw
// data is written: an entry's rows by the one rank that computed it with
// independent MPI-IO, its status byte last. Because no metadata changes after
// creation, a process killed at any moment leaves a file that opens, and an
// entry whose status byte says done has all its rows on disk (the writes had
// returned to the OS before the status write began).
#include "catalogue/catalogue.hpp"

#include <fcntl.h>
#include <sys/file.h>
#include <sys/resource.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstring>
#include <ctime>
#include <exception>
#include <limits>
#include <map>
#include <optional>
#include <system_error>

#include "catalogue/describe.hpp"
#include "catalogue/hdf5.hpp"
#include "core/collective.hpp"
#include "core/errors.hpp"
#include "core/version.hpp"

namespace spinflip::catalogue {

namespace fs = std::filesystem;
using h5::Handle;

namespace {

constexpr std::size_t name_bytes = 64;  // fixed-length strings of /design

int comm_rank(MPI_Comm comm) {
  int r = 0;
  SPINFLIP_CHECK_MPI(MPI_Comm_rank(comm, &r));
  return r;
}

std::string utc_now() {
  std::time_t t = std::time(nullptr);
  std::tm tm{};
  gmtime_r(&t, &tm);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%SZ", &tm);
  return buf;
}

/// Cut to at most `bytes` - 1 bytes without splitting a UTF-8 sequence.
std::string fit(std::string_view s, std::size_t bytes) {
  if (s.size() < bytes) return std::string(s);
  std::size_t n = bytes - 1;
  while (n > 0 && (static_cast<unsigned char>(s[n]) & 0xC0) == 0x80) --n;
  return std::string(s.substr(0, n));
}

Handle mpio_fapl(MPI_Comm comm) {
  Handle fapl = h5::plist(SPINFLIP_H5_ID(H5Pcreate(H5P_FILE_ACCESS)));
  SPINFLIP_H5(H5Pset_fapl_mpio(fapl, comm, MPI_INFO_NULL));
  // Readers (spinflip status, h5py) may look at the file while a run writes it.
  SPINFLIP_H5(H5Pset_file_locking(fapl, false, true));
  return fapl;
}

Handle serial_fapl() {
  Handle fapl = h5::plist(SPINFLIP_H5_ID(H5Pcreate(H5P_FILE_ACCESS)));
  SPINFLIP_H5(H5Pset_fapl_sec2(fapl));
  SPINFLIP_H5(H5Pset_file_locking(fapl, false, true));
  return fapl;
}

/// "design" for the group /design (H5Iget_name without the leading '/').
std::string object_path(hid_t object) {
  const ssize_t n = H5Iget_name(object, nullptr, 0);
  if (n <= 0) return {};
  std::string out(static_cast<std::size_t>(n) + 1, '\0');
  H5Iget_name(object, out.data(), out.size());
  out.resize(static_cast<std::size_t>(n));
  return out.substr(out.find_first_not_of('/') == std::string::npos ? out.size() : out.find_first_not_of('/'));
}

Handle open_group(hid_t parent, const std::string& name) {
  return h5::group(SPINFLIP_H5_ID(H5Gopen2(parent, name.c_str(), H5P_DEFAULT)));
}
Handle open_dataset(hid_t parent, const std::string& name) {
  return h5::dataset(SPINFLIP_H5_ID(H5Dopen2(parent, name.c_str(), H5P_DEFAULT)));
}

void write_value_attribute(hid_t object, const std::string& name, const core::Value& v) {
  std::visit(
      [&](const auto& x) {
        using T = std::decay_t<decltype(x)>;
        if constexpr (std::is_same_v<T, bool>)
          h5::write_attribute(object, name, std::int64_t{x ? 1 : 0});  // h5py: 0 or 1
        else
          h5::write_attribute(object, name, x);
      },
      v);
}

/// Writes done while creating: every rank calls, rank 0 supplies the data.
class Creator {
 public:
  Creator(hid_t file, MPI_Comm comm) : file_(file), root_(comm_rank(comm) == 0) {
    dxpl_ = h5::plist(SPINFLIP_H5_ID(H5Pcreate(H5P_DATASET_XFER)));
    SPINFLIP_H5(H5Pset_dxpl_mpio(dxpl_, H5FD_MPIO_COLLECTIVE));
  }

  Handle group(hid_t parent, const std::string& name) {
    return h5::group(SPINFLIP_H5_ID(H5Gcreate2(parent, name.c_str(), H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT)));
  }

  /// A contiguous dataset, allocated now and filled with `fill` (or zeros).
  Handle dataset(hid_t parent, const std::string& name, hid_t type, const std::vector<hsize_t>& d,
                 const void* fill = nullptr) {
    Handle dcpl = h5::plist(SPINFLIP_H5_ID(H5Pcreate(H5P_DATASET_CREATE)));
    SPINFLIP_H5(H5Pset_layout(dcpl, H5D_CONTIGUOUS));
    SPINFLIP_H5(H5Pset_alloc_time(dcpl, H5D_ALLOC_TIME_EARLY));
    SPINFLIP_H5(H5Pset_fill_time(dcpl, H5D_FILL_TIME_ALLOC));
    if (fill) SPINFLIP_H5(H5Pset_fill_value(dcpl, type, fill));
    // No object times: they would be the only bytes that differ between runs.
    SPINFLIP_H5(H5Pset_obj_track_times(dcpl, false));
    Handle space = h5::simple_space(d);
    Handle ds = h5::dataset(SPINFLIP_H5_ID(H5Dcreate2(parent, name.c_str(), type, space, H5P_DEFAULT, dcpl, H5P_DEFAULT)));
    // Every dataset says what it holds (docs/catalogue.md); `values` is described by its kernel.
    if (name != "values") annotate(ds, describe_dataset(object_path(parent) + "/" + name));
    return ds;
  }

  /// Collective write of a whole dataset whose data rank 0 holds.
  void write_all(hid_t ds, hid_t memtype, const void* data) {
    Handle file_space = h5::dataspace(SPINFLIP_H5_ID(H5Dget_space(ds)));
    Handle mem_space = h5::dataspace(SPINFLIP_H5_ID(H5Scopy(file_space)));
    if (!root_) {
      SPINFLIP_H5(H5Sselect_none(file_space));
      SPINFLIP_H5(H5Sselect_none(mem_space));
    }
    SPINFLIP_H5(H5Dwrite(ds, memtype, mem_space, file_space, dxpl_, data));
  }

  template <class T>
  void make(hid_t parent, const std::string& name, hid_t type, const std::vector<hsize_t>& d,
            const std::vector<T>& data) {
    Handle ds = dataset(parent, name, type, d);
    if (!data.empty()) write_all(ds, type, data.data());
  }
  void make_strings(hid_t parent, const std::string& name, const std::vector<std::string>& values,
                    std::size_t bytes) {
    Handle t = h5::fixed_string_type(bytes);
    std::vector<char> buf(values.size() * bytes, '\0');
    for (std::size_t i = 0; i < values.size(); ++i) {
      std::string s = fit(values[i], bytes);
      std::memcpy(buf.data() + i * bytes, s.data(), s.size());
    }
    Handle ds = dataset(parent, name, t, {values.size()});
    if (!buf.empty()) write_all(ds, t, buf.data());
  }

 private:
  hid_t file_;
  bool root_;
  Handle dxpl_;
};

/// An axis with one value per unit and coefficient, stored (n_units, n_coeff).
bool is_unit_axis(const Axis& a) { return a.name.size() > 8 && a.name.ends_with("_by_unit"); }

void check_layout(const Layout& L) {
  auto bad = [](const std::string& what) { throw InternalError("catalogue layout: " + what); };
  const std::size_t np = L.parameters.size();
  for (const auto& p : L.points)
    if (p.values.size() != np) bad("a design point has the wrong number of parameters");
  for (const auto& e : L.entries)
    if (e.point < 0 || static_cast<std::size_t>(e.point) >= L.points.size()) bad("an entry's point is out of range");
  for (const auto& s : L.scenarios)
    for (const auto& k : s.kernels) {
      if (k.unit_freq_MHz.size() != k.unit_z.size()) bad(s.name + "/" + k.name + ": unit axes differ in length");
      for (const auto& a : k.axes) {
        std::size_t n = std::visit([](const auto& v) { return v.size(); }, a.values);
        if (n != (is_unit_axis(a) ? k.unit_z.size() : 1) * k.n_coeff)
          bad(s.name + "/" + k.name + "/" + a.name + " does not have n_coeff (× n_units for *_by_unit) values");
      }
    }
}

/// The bytes of the datasets that grow with the entries (a lower bound of the
/// file's size: metadata and the design come on top).
std::uintmax_t raw_bytes(const Layout& L) {
  std::uintmax_t per_entry = 2 * 8 * L.history_z.size() + error_text_bytes + sha256_text_bytes + 8 + 4 + 1 +
                             8 * L.parameters.size() + 3 * 8 + 2 * 8;
  for (const auto& s : L.scenarios)
    for (const auto& k : s.kernels) per_entry += 8 * k.unit_z.size() * k.n_coeff;
  return per_entry * L.entries.size();
}

/// Refuse, before a byte is written, a catalogue that cannot fit: the file is
/// pre-allocated whole, so a full disk or a file size limit (ulimit -f) would
/// otherwise stop its creation half way.
void check_room(const fs::path& path, const fs::path& dir, std::uintmax_t need) {
  auto mb = [](std::uintmax_t b) { return std::to_string((b + 999999) / 1000000) + " MB"; };
  std::error_code ec;
  const fs::space_info space = fs::space(dir, ec);
  if (!ec && space.available < need)
    throw IoError("cannot create catalogue " + path.string() + ": it needs at least " + mb(need) + " and " +
                  dir.string() + " has " + mb(space.available) + " free");
  rlimit lim{};
  if (::getrlimit(RLIMIT_FSIZE, &lim) == 0 && lim.rlim_cur != RLIM_INFINITY && lim.rlim_cur < need)
    throw IoError("cannot create catalogue " + path.string() + ": it needs at least " + mb(need) +
                  " and this process may write files of " + mb(lim.rlim_cur) + " at most (ulimit -f)");
}

/// An exclusive advisory lock on `<real catalogue path>.lock`, held while a run
/// has the file open for writing. The path is resolved first (symlinks to the
/// file or to any folder above it, `..`, relative paths), so every name of one
/// file finds one lock. The lock is a file of its own rather than a lock on the
/// catalogue because MPI-IO takes byte-range locks on the catalogue itself
/// (ROMIO on NFS), which a whole-file lock held by rank 0 would block. The
/// kernel drops it when the process dies, kill -9 included, so a crashed run
/// never leaves a stale lock.
class LockFile {
 public:
  LockFile() = default;
  explicit LockFile(const fs::path& catalogue) {
    std::error_code ec;
    fs::path p = fs::weakly_canonical(fs::absolute(catalogue, ec), ec);
    if (ec || p.empty()) p = catalogue;
    p += ".lock";
    fd_ = ::open(p.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0644);
    if (fd_ < 0)
      throw IoError("cannot create the lock file " + p.string() + ": " + std::strerror(errno) +
                    " (the catalogue's folder must be writable)");
    if (::flock(fd_, LOCK_EX | LOCK_NB) != 0) {
      ::close(fd_);
      fd_ = -1;
      throw IoError("catalogue " + catalogue.string() + " is in use by another spinflip run (" + p.string() +
                    " is locked, maybe through another path to the same file): wait for it to finish or use "
                    "another -o path");
    }
  }
  LockFile(LockFile&& o) noexcept : fd_(std::exchange(o.fd_, -1)) {}
  LockFile& operator=(LockFile&& o) noexcept {
    std::swap(fd_, o.fd_);
    return *this;
  }
  ~LockFile() {
    if (fd_ >= 0) ::close(fd_);
  }

 private:
  int fd_ = -1;
};

struct KernelSets {
  Handle values;
  hsize_t n_units = 0, n_coeff = 0;
};

}  // namespace

struct Catalogue::Impl {
  fs::path path;
  MPI_Comm comm = MPI_COMM_NULL;
  int rank = 0;
  LockFile lock;
  Handle file, dxpl;
  Handle status, error, wall_time, rank_of, x_hi, mean_tb, mean_tk, mean_ts, source_sha256;
  std::vector<std::vector<KernelSets>> stats;  // [scenario][kernel]
  hsize_t n_entries = 0, n_z = 0;
  bool closed = false;
  int unwinding_at_start = 0;

  ~Impl() {
    if (closed) return;
    if (std::uncaught_exceptions() > unwinding_at_start) {
      // Closing is collective; a rank unwinding alone must not wait for peers
      // that never come. The file stays valid (nothing but raw data changed).
      for (auto& s : stats)
        for (auto& k : s) k.values.release();
      for (Handle* h : {&status, &error, &wall_time, &rank_of, &x_hi, &mean_tb, &mean_tk, &mean_ts, &source_sha256, &file})
        h->release();
    } else {
      try {
        close_all();
      } catch (...) {
      }
    }
    if (comm != MPI_COMM_NULL) MPI_Comm_free(&comm);
  }

  void close_all() {
    for (auto& s : stats)
      for (auto& k : s) k.values.close();
    for (Handle* h : {&status, &error, &wall_time, &rank_of, &x_hi, &mean_tb, &mean_tk, &mean_ts, &source_sha256}) h->close();
    dxpl.close();
    file.close();
    closed = true;
  }

  /// Write `data` (one row of `ds`: everything after axis 0) at row `entry`;
  /// a write the file system refuses (a full disk, a file size limit) is an
  /// IoError naming the catalogue, so the run can stop cleanly and resumably.
  void write_row(hid_t ds, hid_t memtype, std::size_t entry, const void* data) {
    try {
      write_row_unchecked(ds, memtype, entry, data);
    } catch (const InternalError& e) {
      throw IoError("catalogue " + path.string() + ": the file system refused a write (a full disk or a file size "
                    "limit?): " + e.what());
    }
  }
  void write_row_unchecked(hid_t ds, hid_t memtype, std::size_t entry, const void* data) {
    Handle space = h5::dataspace(SPINFLIP_H5_ID(H5Dget_space(ds)));
    std::vector<hsize_t> d = h5::dims(ds);
    std::vector<hsize_t> start(d.size(), 0), count = d;
    start[0] = entry;
    count[0] = 1;
    SPINFLIP_H5(H5Sselect_hyperslab(space, H5S_SELECT_SET, start.data(), nullptr, count.data(), nullptr));
    hsize_t n = 1;
    for (std::size_t i = 1; i < d.size(); ++i) n *= d[i];
    Handle mem = h5::simple_space({n});
    SPINFLIP_H5(H5Dwrite(ds, memtype, mem, space, dxpl, data));
  }

  void check_entry(std::size_t entry) const {
    if (entry >= n_entries)
      throw InternalError("catalogue: entry " + std::to_string(entry) + " out of range (" +
                          std::to_string(n_entries) + " entries)");
  }
};

Catalogue::Catalogue(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
Catalogue::Catalogue(Catalogue&&) noexcept = default;
Catalogue& Catalogue::operator=(Catalogue&&) noexcept = default;
Catalogue::~Catalogue() = default;

Catalogue Catalogue::create(const fs::path& path, const Layout& L, MPI_Comm comm) {
  h5::silence_errors();
  check_layout(L);
  fs::path partial = path;
  partial += ".partial";
  std::optional<LockFile> lock;  // rank 0, held while the file is built
  core::run_on_root(comm, [&] {
    std::error_code ec;
    fs::path dir0 = path.parent_path().empty() ? fs::path(".") : path.parent_path();
    if (fs::is_directory(dir0, ec) && ::access(dir0.c_str(), W_OK) == 0) lock.emplace(path);
    if (fs::exists(path, ec))
      throw IoError("catalogue " + path.string() + " already exists (open it to resume instead)");
    fs::path dir = path.parent_path().empty() ? fs::path(".") : path.parent_path();
    if (!fs::is_directory(dir, ec))
      throw IoError("cannot write catalogue " + path.string() + ": folder " + dir.string() + " does not exist");
    if (::access(dir.c_str(), W_OK) != 0)
      throw IoError("cannot write catalogue " + path.string() + ": folder " + dir.string() + " is not writable");
    check_room(path, dir, raw_bytes(L));
    fs::remove(partial, ec);  // a creation that was interrupted before
  });
  {
    Handle fapl = mpio_fapl(comm);
    hid_t fid = H5Fcreate(partial.c_str(), H5F_ACC_TRUNC, H5P_DEFAULT, fapl);
    if (fid < 0)
      throw IoError("cannot create catalogue " + partial.string() + ": " + h5::error_stack_text());
    Handle file = h5::file(fid);
    Creator c(file, comm);
    const bool root = comm_rank(comm) == 0;

    h5::write_attribute(file, "format_version", format_version);
    h5::write_attribute(file, "tool_version", std::string(tool_version));
    h5::write_attribute(file, "git_revision", std::string(git_revision));
    h5::write_attribute(file, "compiler", std::string(compiler_id));
    h5::write_attribute(file, "build_flags", std::string(build_flags));
    h5::write_attribute(file, "campaign_sha256", L.campaign_sha256);
    h5::write_attribute(file, "campaign_text", L.campaign_text);
    h5::write_attribute(file, "campaign_file", L.campaign_file);
    // Every rank must write identical attribute bytes: rank 0's clock decides.
    std::string created = utc_now();
    created.resize(32);
    SPINFLIP_CHECK_MPI(MPI_Bcast(created.data(), 32, MPI_CHAR, 0, comm));
    created.resize(std::strlen(created.c_str()));
    h5::write_attribute(file, "created_utc", created);
    for (const auto& [name, value] : L.attributes) write_value_attribute(file, name, value);

    const hsize_t np = L.parameters.size(), npts = L.points.size(), ne = L.entries.size(), nz = L.history_z.size();
    {
      Handle g = c.group(file, "design");
      h5::write_attribute(g, "designs", L.design_names);
      std::vector<std::string> names, units, labels, roles;
      std::vector<std::int8_t> logs;
      std::vector<double> pmin, pmax, pfid;
      for (const auto& p : L.parameters) {
        names.push_back(p.name), units.push_back(p.unit), logs.push_back(p.log ? 1 : 0);
        labels.push_back(p.label.empty() ? p.name : p.label);
        pmin.push_back(p.min), pmax.push_back(p.max), pfid.push_back(p.fiducial);
      }
      c.make_strings(g, "param_names", names, name_bytes);
      c.make_strings(g, "param_units", units, name_bytes);
      std::size_t label_bytes = name_bytes;  // a label is free text: never cut it
      for (const auto& l : labels) label_bytes = std::max(label_bytes, l.size() + 1);
      c.make_strings(g, "param_labels", labels, label_bytes);
      c.make(g, "param_log", H5T_NATIVE_INT8, {np}, logs);
      c.make(g, "param_min", H5T_NATIVE_DOUBLE, {np}, pmin);
      c.make(g, "param_max", H5T_NATIVE_DOUBLE, {np}, pmax);
      c.make(g, "param_fiducial", H5T_NATIVE_DOUBLE, {np}, pfid);
      std::vector<double> points;
      std::vector<std::int32_t> design_index, stencil_param, step_index;
      std::vector<double> step;
      std::vector<std::int64_t> seed_point;
      for (const auto& p : L.points) {
        points.insert(points.end(), p.values.begin(), p.values.end());
        roles.push_back(p.role), design_index.push_back(p.design_index), stencil_param.push_back(p.stencil_param);
        step.push_back(p.stencil_step), step_index.push_back(p.stencil_step_index), seed_point.push_back(p.seed_point);
      }
      c.make(g, "points", H5T_NATIVE_DOUBLE, {npts, np}, points);
      c.make_strings(g, "role", roles, 16);
      c.make(g, "design_index", H5T_NATIVE_INT32, {npts}, design_index);
      c.make(g, "stencil_param", H5T_NATIVE_INT32, {npts}, stencil_param);
      c.make(g, "stencil_step", H5T_NATIVE_DOUBLE, {npts}, step);
      c.make(g, "stencil_step_index", H5T_NATIVE_INT32, {npts}, step_index);
      c.make(g, "seed_point", H5T_NATIVE_INT64, {npts}, seed_point);
    }
    {
      Handle g = c.group(file, "entries");
      std::vector<std::int64_t> point, real;
      std::vector<double> params;
      std::vector<std::uint64_t> seed;
      for (const auto& e : L.entries) {
        point.push_back(e.point), real.push_back(e.realisation);
        const auto& v = L.points[static_cast<std::size_t>(e.point)].values;
        params.insert(params.end(), v.begin(), v.end());
        seed.insert(seed.end(), e.seed.begin(), e.seed.end());
      }
      c.make(g, "point", H5T_NATIVE_INT64, {ne}, point);
      c.make(g, "realisation", H5T_NATIVE_INT64, {ne}, real);
      c.make(g, "params", H5T_NATIVE_DOUBLE, {ne, np}, params);
      c.make(g, "seed", H5T_NATIVE_UINT64, {ne, 3}, seed);
      c.dataset(g, "status", H5T_NATIVE_INT8, {ne});  // fill 0: pending
      Handle t = h5::fixed_string_type(error_text_bytes);
      c.dataset(g, "error", t, {ne});
      const double nan = std::numeric_limits<double>::quiet_NaN();
      c.dataset(g, "wall_time_s", H5T_NATIVE_DOUBLE, {ne}, &nan);
      const std::int32_t none = -1;
      c.dataset(g, "rank", H5T_NATIVE_INT32, {ne}, &none);
      // Ingested cones (docs/ingest.md): the file is known now, its checksum when the entry runs.
      std::vector<std::string> files;
      std::size_t longest = 1;
      for (const auto& e : L.entries) files.push_back(e.source_file), longest = std::max(longest, e.source_file.size());
      c.make_strings(g, "source_file", files, longest + 1);  // fit() keeps bytes - 1
      Handle st = h5::fixed_string_type(sha256_text_bytes);
      c.dataset(g, "source_sha256", st, {ne});
    }
    {
      Handle g = c.group(file, "cones");
      Handle h = c.group(g, "history");
      c.make(h, "z", H5T_NATIVE_DOUBLE, {nz}, L.history_z);
      const double nan = std::numeric_limits<double>::quiet_NaN();
      c.dataset(h, "x_hi", H5T_NATIVE_DOUBLE, {ne, nz}, &nan);
      c.dataset(h, "mean_tb_mK", H5T_NATIVE_DOUBLE, {ne, nz}, &nan);
      // Plane means of the gas and spin temperatures (NaN where the cone has no spin-temperature model).
      c.dataset(h, "mean_tk_K", H5T_NATIVE_DOUBLE, {ne, nz}, &nan);
      c.dataset(h, "mean_ts_K", H5T_NATIVE_DOUBLE, {ne, nz}, &nan);
    }
    {
      Handle stats = c.group(file, "stats");
      std::vector<std::string> scenario_names;
      for (const auto& s : L.scenarios) scenario_names.push_back(s.name);
      h5::write_attribute(stats, "scenarios", scenario_names);
      for (const auto& s : L.scenarios) {
        Handle sg = c.group(stats, s.name);
        for (const auto& [name, value] : s.attributes) write_value_attribute(sg, name, value);
        std::vector<std::string> kernel_names;
        for (const auto& k : s.kernels) kernel_names.push_back(k.name);
        h5::write_attribute(sg, "kernels", kernel_names);
        for (const auto& k : s.kernels) {
          Handle kg = c.group(sg, k.name);
          for (const auto& [name, value] : k.attributes) write_value_attribute(kg, name, value);
          h5::write_attribute(kg, "unit_kind", k.unit_kind);
          const hsize_t nu = k.unit_z.size(), nc = k.n_coeff;
          const double nan = std::numeric_limits<double>::quiet_NaN();
          Handle values = c.dataset(kg, "values", H5T_NATIVE_DOUBLE, {ne, nu, nc}, &nan);
          annotate(values, describe_values(k.attributes));
          c.make(kg, "unit_freq_MHz", H5T_NATIVE_DOUBLE, {nu}, k.unit_freq_MHz);
          c.make(kg, "unit_z", H5T_NATIVE_DOUBLE, {nu}, k.unit_z);
          for (const auto& a : k.axes) {
            if (a.name == "values" || a.name == "unit_freq_MHz" || a.name == "unit_z")
              throw InternalError("kernel " + k.name + " names an axis '" + a.name + "', a reserved name");
            const std::vector<hsize_t> dims = is_unit_axis(a) ? std::vector<hsize_t>{nu, nc} : std::vector<hsize_t>{nc};
            if (const auto* d = std::get_if<std::vector<double>>(&a.values))
              c.make(kg, a.name, H5T_NATIVE_DOUBLE, dims, *d);
            else
              c.make(kg, a.name, H5T_NATIVE_INT64, dims, std::get<std::vector<std::int64_t>>(a.values));
          }
          std::vector<std::string> coeff_axes;
          for (const auto& a : k.axes) coeff_axes.push_back(a.name);
          attach_scales(kg, values, 3, {"unit_freq_MHz", "unit_z"}, coeff_axes);
        }
      }
    }
    (void)root;
    file.close();  // collective: metadata written once, here
  }
  core::run_on_root(comm, [&] {
    std::error_code ec;
    fs::rename(partial, path, ec);
    if (ec) throw IoError("cannot rename " + partial.string() + " to " + path.string() + ": " + ec.message());
    lock.reset();  // open() takes it again at once
  });
  return open(path, L, comm);
}

Catalogue Catalogue::open(const fs::path& path, const Layout& L, MPI_Comm comm) {
  h5::silence_errors();
  auto impl = std::make_unique<Impl>();
  impl->unwinding_at_start = std::uncaught_exceptions();
  impl->path = path;
  SPINFLIP_CHECK_MPI(MPI_Comm_dup(comm, &impl->comm));
  impl->rank = comm_rank(comm);
  // Identity first, read-only and by one process, so a refused file is untouched.
  core::run_on_root(comm, [&] {
    std::error_code ec;
    if (!fs::exists(path, ec)) throw IoError("catalogue " + path.string() + " does not exist");
    Handle fapl = serial_fapl();
    hid_t fid = H5Fopen(path.c_str(), H5F_ACC_RDONLY, fapl);
    if (fid < 0) throw IoError("cannot open catalogue " + path.string() + ": not an HDF5 file or unreadable");
    Handle file = h5::file(fid);
    if (!h5::has_attribute(file, "campaign_sha256") || !h5::has_attribute(file, "format_version"))
      throw IoError(path.string() + " is not a spinflip catalogue (no campaign_sha256 attribute)");
    std::int64_t version = h5::read_int_attribute(file, "format_version");
    if (version != format_version)
      throw IoError("catalogue " + path.string() + " has format_version " + std::to_string(version) +
                    ", this spinflip writes " + std::to_string(format_version));
    std::string sha = h5::read_string_attribute(file, "campaign_sha256");
    if (sha != L.campaign_sha256)
      throw ConfigError("catalogue " + path.string() + " was made by a different campaign (campaign_sha256 " +
                        sha.substr(0, 12) + "…, this campaign " + L.campaign_sha256.substr(0, 12) +
                        "…): refused, the catalogue is left untouched; use another -o path");
    impl->lock = LockFile(path);
  });
  Handle fapl = mpio_fapl(comm);
  hid_t fid = H5Fopen(path.c_str(), H5F_ACC_RDWR, fapl);
  if (fid < 0) throw IoError("cannot open catalogue " + path.string() + " for writing: " + h5::error_stack_text());
  impl->file = h5::file(fid);
  impl->dxpl = h5::plist(SPINFLIP_H5_ID(H5Pcreate(H5P_DATASET_XFER)));
  SPINFLIP_H5(H5Pset_dxpl_mpio(impl->dxpl, H5FD_MPIO_INDEPENDENT));
  {
    Handle g = open_group(impl->file, "entries");
    impl->status = open_dataset(g, "status");
    impl->error = open_dataset(g, "error");
    impl->wall_time = open_dataset(g, "wall_time_s");
    impl->rank_of = open_dataset(g, "rank");
    if (H5Lexists(g, "source_sha256", H5P_DEFAULT) > 0) impl->source_sha256 = open_dataset(g, "source_sha256");
    Handle h = open_group(impl->file, "cones/history");
    impl->x_hi = open_dataset(h, "x_hi");
    impl->mean_tb = open_dataset(h, "mean_tb_mK");
    if (H5Lexists(h, "mean_tk_K", H5P_DEFAULT) > 0) impl->mean_tk = open_dataset(h, "mean_tk_K");
    if (H5Lexists(h, "mean_ts_K", H5P_DEFAULT) > 0) impl->mean_ts = open_dataset(h, "mean_ts_K");
  }
  impl->n_entries = h5::dims(impl->status).at(0);
  impl->n_z = h5::dims(impl->x_hi).at(1);
  auto mismatch = [&](const std::string& what) {
    throw ConfigError("catalogue " + path.string() + " does not match its campaign's layout (" + what +
                      "): it was made by another spinflip version; use another -o path");
  };
  if (impl->n_entries != L.entries.size()) mismatch("number of entries");
  if (impl->n_z != L.history_z.size()) mismatch("history redshifts");
  Handle stats = open_group(impl->file, "stats");
  for (const auto& s : L.scenarios) {
    if (H5Lexists(stats, s.name.c_str(), H5P_DEFAULT) <= 0) mismatch("scenario " + s.name);
    Handle sg = open_group(stats, s.name);
    auto& row = impl->stats.emplace_back();
    for (const auto& k : s.kernels) {
      if (H5Lexists(sg, k.name.c_str(), H5P_DEFAULT) <= 0) mismatch("kernel " + s.name + "/" + k.name);
      KernelSets ks;
      ks.values = open_dataset(sg, k.name + "/values");
      auto d = h5::dims(ks.values);
      ks.n_units = d.at(1), ks.n_coeff = d.at(2);
      if (ks.n_units != k.unit_z.size() || ks.n_coeff != k.n_coeff) mismatch("shape of " + s.name + "/" + k.name);
      row.push_back(std::move(ks));
    }
  }
  return Catalogue(std::move(impl));
}

std::size_t Catalogue::n_entries() const { return impl_->n_entries; }

std::vector<Status> Catalogue::statuses() const {
  std::vector<std::int8_t> raw(impl_->n_entries, 0);
  if (impl_->rank == 0 && !raw.empty())
    SPINFLIP_H5(H5Dread(impl_->status, H5T_NATIVE_INT8, H5S_ALL, H5S_ALL, impl_->dxpl, raw.data()));
  SPINFLIP_CHECK_MPI(MPI_Bcast(raw.data(), static_cast<int>(raw.size()), MPI_INT8_T, 0, impl_->comm));
  std::vector<Status> out;
  out.reserve(raw.size());
  for (auto v : raw) out.push_back(v == 1 ? Status::done : v == 2 ? Status::failed : Status::pending);
  return out;
}

void Catalogue::write_entry(std::size_t entry, const EntryResult& r) {
  Impl& m = *impl_;
  m.check_entry(entry);
  if (r.x_hi.size() != m.n_z || r.mean_tb_mK.size() != m.n_z)
    throw InternalError("catalogue: history rows do not have " + std::to_string(m.n_z) + " redshifts");
  if (r.values.size() != m.stats.size()) throw InternalError("catalogue: wrong number of scenarios in a result");
  for (std::size_t s = 0; s < m.stats.size(); ++s) {
    if (r.values[s].size() != m.stats[s].size()) throw InternalError("catalogue: wrong number of kernels in a result");
    for (std::size_t k = 0; k < m.stats[s].size(); ++k)
      if (r.values[s][k].size() != m.stats[s][k].n_units * m.stats[s][k].n_coeff)
        throw InternalError("catalogue: kernel " + std::to_string(k) + " of scenario " + std::to_string(s) +
                            " returned " + std::to_string(r.values[s][k].size()) + " values, the layout has " +
                            std::to_string(m.stats[s][k].n_units * m.stats[s][k].n_coeff));
  }
  m.write_row(m.x_hi, H5T_NATIVE_DOUBLE, entry, r.x_hi.data());
  m.write_row(m.mean_tb, H5T_NATIVE_DOUBLE, entry, r.mean_tb_mK.data());
  if (r.mean_tk_K.size() == m.n_z && m.mean_tk) m.write_row(m.mean_tk, H5T_NATIVE_DOUBLE, entry, r.mean_tk_K.data());
  if (r.mean_ts_K.size() == m.n_z && m.mean_ts) m.write_row(m.mean_ts, H5T_NATIVE_DOUBLE, entry, r.mean_ts_K.data());
  for (std::size_t s = 0; s < m.stats.size(); ++s)
    for (std::size_t k = 0; k < m.stats[s].size(); ++k)
      m.write_row(m.stats[s][k].values, H5T_NATIVE_DOUBLE, entry, r.values[s][k].data());
  char blank[error_text_bytes] = {};
  Handle t = h5::fixed_string_type(error_text_bytes);
  m.write_row(m.error, t, entry, blank);  // a retried failure loses its old message
  m.write_row(m.wall_time, H5T_NATIVE_DOUBLE, entry, &r.wall_time_s);
  m.write_row(m.rank_of, H5T_NATIVE_INT32, entry, &r.rank);
  if (m.source_sha256) {  // absent in catalogues made before ingest
    char sha[sha256_text_bytes] = {};
    std::memcpy(sha, r.source_sha256.data(), std::min(r.source_sha256.size(), sha256_text_bytes));
    Handle st = h5::fixed_string_type(sha256_text_bytes);
    m.write_row(m.source_sha256, st, entry, sha);
  }
  const std::int8_t done = static_cast<std::int8_t>(Status::done);
  m.write_row(m.status, H5T_NATIVE_INT8, entry, &done);  // last: the entry's commit point
}

void Catalogue::write_failure(std::size_t entry, std::string_view message, double wall_time_s, std::int32_t rank) {
  Impl& m = *impl_;
  m.check_entry(entry);
  char text[error_text_bytes] = {};
  std::string s = fit(message, error_text_bytes);
  std::memcpy(text, s.data(), s.size());
  Handle t = h5::fixed_string_type(error_text_bytes);
  m.write_row(m.error, t, entry, text);
  m.write_row(m.wall_time, H5T_NATIVE_DOUBLE, entry, &wall_time_s);
  m.write_row(m.rank_of, H5T_NATIVE_INT32, entry, &rank);
  const std::int8_t failed = static_cast<std::int8_t>(Status::failed);
  m.write_row(m.status, H5T_NATIVE_INT8, entry, &failed);
}

void Catalogue::close() {
  if (impl_ && !impl_->closed) impl_->close_all();
}

}  // namespace spinflip::catalogue
