// Bring-your-own light cones (DESIGN.md §2): a manifest of cone files (one row
// per cone: file, parameter values, realisation, optional role) and one layout
// shared by the files ([ingest] keys). Files are read by slab of axis 0 and
// resampled along the line of sight onto the campaign's comoving grid.
// Formats and the interpolation: docs/ingest.md.
#pragma once
#include <mpi.h>

#include <array>
#include <cstddef>
#include <filesystem>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "core/config.hpp"
#include "sim/lightcone.hpp"

namespace spinflip::cosmo { class Cosmology; }

namespace spinflip::ingest {

/// Declare the [ingest] keys.
void declare_keys(core::Schema& schema);

enum class Format { automatic, hdf5, npy, raw };
enum class LosCoordinate { frequency_MHz, redshift, distance_mpc };

/// How every file of the manifest is laid out.
struct Layout {
  Format format = Format::automatic;  // automatic: from each file's extension
  std::string dataset = "delta_tb_mK";  // HDF5 dataset of the cone (what `spinflip cone` writes)
  std::array<int, 3> file_axis{0, 1, 2};  // file axis holding campaign axis x, y, line of sight
  double to_mK = 1.0;                 // 1 (mK) or 1000 (K)
  LosCoordinate los = LosCoordinate::frequency_MHz;
  std::string los_dataset;            // HDF5 dataset of per-slice coordinates, or empty
  std::optional<double> los_start, los_step;  // slice-centre coordinates start + j·step
  std::optional<double> transverse_cell_mpc, field_of_view_mpc;  // at most one given
  bool scan_nan = false;
};

struct ManifestRow {
  std::filesystem::path file;  // resolved against the manifest's directory
  std::vector<double> values;  // one per Manifest::param_names
  std::size_t realisation = 0;
  std::string role = "list";   // training, fiducial, stencil+, stencil-, list
  std::string where;           // "cones.csv:4"
};

struct Manifest {
  std::filesystem::path source;
  std::vector<std::string> param_names;  // the campaign's [parameters.*] by name
  std::vector<ManifestRow> rows;
  Layout layout;
  /// Row problems found while reading the manifest (one line each); rows with a
  /// problem are left out of `rows`.
  std::vector<std::string> problems;
};

/// Layout and manifest of a campaign's [ingest] table. ConfigError for a bad
/// key or an unreadable manifest; row-level problems go to Manifest::problems.
Manifest manifest_from(const core::Config& config);
Layout layout_from(const core::Config& config);
/// Parse a manifest file (.csv or .toml) against given parameter names.
Manifest read_manifest(const std::filesystem::path& file, const std::vector<std::string>& param_names,
                       const Layout& layout);

/// The manifest as design points: rows with the same parameter vector form
/// one point (first-appearance order), each realisation naming its row. For a
/// campaign's design: point i has `values`, `role`; entries (i, realisation).
struct ManifestPoint {
  std::vector<double> values;
  std::string role;  // of the point's first row
  std::vector<std::pair<std::size_t, std::size_t>> realisations;  // (realisation, row index), ascending
};
/// InputError (one line per problem) if rows of one point disagree on the role.
std::vector<ManifestPoint> points_of(const Manifest& manifest);

/// The campaign's comoving grid: n_perp² × n_los cells of cell_mpc, LOS cell
/// centres from the near end at z_min (the generator's grid, sim/lightcone.hpp).
struct Target {
  std::size_t n_perp = 0, n_los = 0;
  double cell_mpc = 0;
  std::vector<double> distance_mpc, z, freq_MHz;
};
Target target_from(const sim::ConeSettings& settings, const cosmo::Cosmology& cosmology);

/// Open every file's header (and with `scan` its data, for NaN/Inf) and list
/// every problem, one line each: the manifest's own, missing files, wrong
/// shapes, band not covered, duplicate (parameters, realisation), one file
/// named with different parameters. Empty: all rows can be read.
std::vector<std::string> check_all(const Manifest& manifest, const Target& target,
                                   const cosmo::Cosmology& cosmology, bool scan);
/// check_all for a campaign's configuration: manifest, its [cone] grid and
/// cosmology, every file (what `spinflip plan` lists). ConfigError for a bad
/// [ingest] key or an unreadable manifest; everything else is returned.
std::vector<std::string> check_campaign(const core::Config& config, bool scan);
/// The manifest row of (parameter values, realisation), if any.
std::optional<std::size_t> row_of(const Manifest& manifest, const std::vector<double>& values,
                                  std::size_t realisation);

/// Throw InputError whose message is the problems, one per line.
void throw_if_problems(const std::vector<std::string>& problems);

struct IngestedCone {
  sim::LightCone cone;        // δT_b in mK on the target grid, this rank's slab of axis 0
  std::string sha256;         // of the whole source file (as `sha256sum FILE`)
  std::filesystem::path file;
};

/// This rank's slab of axis 0 for a group, as the FFTW-MPI slab fields lay it out.
std::array<std::size_t, 2> slab_of(std::size_t n_perp, MPI_Comm group);  // {start, count}

/// Read row `row` onto the target grid; collective on `group` (every rank
/// reads only its slab). InputError (on every rank) for a bad file or NaN.
IngestedCone read_cone(const Manifest& manifest, std::size_t row, const Target& target,
                       const cosmo::Cosmology& cosmology, MPI_Comm group);

}  // namespace spinflip::ingest
