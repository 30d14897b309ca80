// Internal to src/ingest: file headers, block reads and the LOS resampling map.
#pragma once
#include <array>
#include <cstddef>
#include <filesystem>
#include <string>
#include <vector>

#include "ingest/ingest.hpp"

namespace spinflip::ingest::detail {

/// What a file's header says (no data read).
struct FileHeader {
  Format format = Format::npy;
  std::array<std::size_t, 3> shape{0, 0, 0};  // file axes
  std::size_t width = 4;                      // bytes per value (4 or 8)
  bool swap = false;                          // byte order differs from this machine
  bool fortran = false;                       // first file axis fastest
  std::size_t data_offset = 0;                // npy/raw: first data byte
  std::vector<double> los_values;             // per slice, from the file or sidecar (else empty)
  std::string dtype;                          // for messages, e.g. "<f4", "float64"
};

/// File format of `file` under `layout` (extension when automatic).
Format format_of(const std::filesystem::path& file, const Layout& layout);
/// Open the header; InputError/IoError "<file>: <what is wrong>" on a bad file.
FileHeader open_header(const std::filesystem::path& file, const Layout& layout);

/// Slice-centre coordinates of the file's LOS axis, in the layout's unit
/// (los_values of the header, else start + j·step). InputError if neither.
std::vector<double> los_coordinates(const std::filesystem::path& file, const FileHeader& h, const Layout& layout);
/// Those coordinates as comoving distance from the observer (Mpc).
std::vector<double> to_distance(const std::vector<double>& coord, LosCoordinate kind, const cosmo::Cosmology& c);

/// Target cell k = (1 - w[k]) · slice[j0[k]] + w[k] · slice[j0[k] + 1] (the second term only when
/// w[k] > 0), slices
/// numbered from j_lo (the first file slice needed); linear in comoving distance.
struct LosMap {
  std::size_t j_lo = 0, n_slices = 0;  // file slices [j_lo, j_lo + n_slices) are read
  std::vector<std::size_t> j0;
  std::vector<double> w;
};
/// InputError "band not covered" when a target centre lies outside the file's
/// slice centres (beyond a 1e-4-cell rounding allowance); also refuses a
/// coordinate that is not strictly monotonic.
LosMap los_map(const std::vector<double>& file_distance, const std::vector<double>& target_distance,
               double cell_mpc, const cosmo::Cosmology& c, const std::string& where);

/// Read file slab x ∈ [x0, x0 + nx), every y, LOS slices [j_lo, j_lo + nj), in
/// campaign axis order (x, y, los) C order, scaled to mK. `group` is used for
/// collective HDF5 reads (MPI_COMM_SELF: serial).
std::vector<float> read_block(const std::filesystem::path& file, const FileHeader& h, const Layout& layout,
                              std::size_t x0, std::size_t nx, std::size_t j_lo, std::size_t nj, MPI_Comm group);

/// First non-finite value of the whole array, as "(i, j, k)" in file axes; empty if none.
std::string scan_nonfinite(const std::filesystem::path& file, const FileHeader& h, const Layout& layout);

/// Shape and coverage checks of one file against the target; one line per problem.
std::vector<std::string> check_file(const ManifestRow& row, const Layout& layout, const Target& target,
                                    const cosmo::Cosmology& c, bool scan);

std::string shape_text(const std::array<std::size_t, 3>& s);
std::string format_number(double v);

}  // namespace spinflip::ingest::detail
