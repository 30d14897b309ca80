// The campaign catalogue (DESIGN.md §7, layout in docs/catalogue.md): one
// parallel-HDF5 file whose every dataset is created collectively and
// pre-allocated before the first entry runs; afterwards a rank writes the rows
// of the entries it computed with independent I/O, status last, so a process
// killed at any moment leaves each entry either done with its data or pending.
#pragma once
#include <mpi.h>

#include <array>
#include <cstdint>
#include <filesystem>
#include <memory>
#include <string>
#include <string_view>
#include <utility>
#include <variant>
#include <vector>

#include "core/config.hpp"

namespace spinflip::catalogue {

inline constexpr std::int64_t format_version = 1;
inline constexpr std::size_t error_text_bytes = 256;
inline constexpr std::size_t sha256_text_bytes = 64;

enum class Status : std::int8_t { pending = 0, done = 1, failed = 2 };

using Attribute = std::pair<std::string, core::Value>;
/// One axis array of a kernel: one value per coefficient (per unit and coefficient,
/// stored (n_units, n_coeff), when the name ends in "_by_unit").
struct Axis {
  std::string name;
  std::variant<std::vector<double>, std::vector<std::int64_t>> values;
};

struct KernelLayout {
  std::string name;       // group name: /stats/<scenario>/<name>
  std::string unit_kind;  // "slice" or "chunk"
  std::size_t n_coeff = 0;
  std::vector<Axis> axes;
  std::vector<double> unit_freq_MHz, unit_z;  // one per unit (slice or chunk)
  std::vector<Attribute> attributes;          // the kernel's resolved configuration
};

struct ScenarioLayout {
  std::string name;
  std::vector<Attribute> attributes;
  std::vector<KernelLayout> kernels;
};

struct ParameterInfo {
  std::string name, unit;
  bool log = false;
  double min = 0, max = 0, fiducial = 0;
  std::string label = {};  // axis label for plots ("T_vir,min [K]"); empty: the name
};

struct PointInfo {
  std::vector<double> values;  // one per parameter
  std::string role;            // training, fiducial, stencil+, stencil-, list
  std::int32_t design_index = 0, stencil_param = -1, stencil_step_index = -1;
  double stencil_step = 0;
  std::int64_t seed_point = 0;
};

struct EntryInfo {
  std::int64_t point = 0, realisation = 0;
  std::array<std::uint64_t, 3> seed{};  // (campaign seed, seed point, realisation)
  std::string source_file;              // ingested cone's file, empty for generated entries
};

/// Everything the file holds except the entries' results.
struct Layout {
  std::string campaign_sha256, campaign_text, campaign_file;
  std::vector<Attribute> attributes;  // further root attributes (campaign name, ...)
  std::vector<ParameterInfo> parameters;
  std::vector<std::string> design_names;  // one per [[designs]] block, e.g. "latin_hypercube"
  std::vector<PointInfo> points;
  std::vector<EntryInfo> entries;
  std::vector<double> history_z;
  std::vector<ScenarioLayout> scenarios;
};

/// The rows of one finished entry.
struct EntryResult {
  std::vector<double> x_hi, mean_tb_mK;                  // one per history z
  std::vector<double> mean_tk_K, mean_ts_K;              // one per history z, or empty (no spin-temperature model)
  std::vector<std::vector<std::vector<double>>> values;  // [scenario][kernel]: n_units × n_coeff, C order
  double wall_time_s = 0;
  std::int32_t rank = 0;
  std::string source_file, source_sha256;  // ingested entries: the file read and its sha256 (hex)
};

class Catalogue {
 public:
  /// Create the file collectively with every dataset allocated (values NaN,
  /// statuses pending). Built under `<path>.partial` and renamed when whole.
  /// IoError if the path exists or cannot be written, or another run holds it.
  static Catalogue create(const std::filesystem::path& path, const Layout& layout, MPI_Comm comm);
  /// Reopen for resume (collective). ConfigError if the file was made by a
  /// different campaign (sha256 differs); the file is not changed then.
  /// The layout must be the one the file was created with (checked by shape).
  static Catalogue open(const std::filesystem::path& path, const Layout& layout, MPI_Comm comm);

  std::size_t n_entries() const;
  /// Statuses of all entries (collective: rank 0 reads, everyone receives).
  std::vector<Status> statuses() const;
  /// Write one entry's rows then mark it done (independent I/O, any one rank).
  void write_entry(std::size_t entry, const EntryResult& result);
  /// Mark an entry failed with its message (independent I/O, any one rank).
  void write_failure(std::size_t entry, std::string_view message, double wall_time_s, std::int32_t rank);
  /// Close collectively (flushes); the destructor closes too but cannot report.
  void close();

  Catalogue(Catalogue&&) noexcept;
  Catalogue& operator=(Catalogue&&) noexcept;
  ~Catalogue();

 private:
  struct Impl;
  explicit Catalogue(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

/// What `spinflip status` prints: read by one process, no MPI needed.
struct Failure {
  std::size_t entry = 0;
  std::int64_t point = 0, realisation = 0;
  std::string message;
};
struct DesignCount {
  std::int32_t design_index = 0;
  std::string name;  // from /design's `designs` attribute
  std::size_t done = 0, failed = 0, pending = 0;
};
struct KernelShape {
  std::string scenario, kernel, unit_kind;
  std::size_t n_units = 0, n_coeff = 0;
};
struct Summary {
  std::string campaign_name, campaign_sha256, created_utc;
  std::size_t n_entries = 0, done = 0, failed = 0, pending = 0;
  std::vector<DesignCount> designs;
  std::vector<KernelShape> kernels;
  std::vector<Failure> failures;
  bool complete() const { return pending == 0; }
};
/// Read a catalogue's state (IoError if it is not a readable spinflip catalogue).
Summary summarise(const std::filesystem::path& path);

/// One entry's values of a kernel, n_units × n_coeff (for tools and tests).
std::vector<double> read_values(const std::filesystem::path& path, const std::string& scenario,
                                const std::string& kernel, std::size_t entry);

}  // namespace spinflip::catalogue
