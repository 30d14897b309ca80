// Internal helpers shared by the three verbs.
#pragma once
#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "analysis/analysis.hpp"
#include "analysis/h5.hpp"

namespace spinflip::cosmo { class Cosmology; }

namespace spinflip::analysis::detail {

/// A scenario's foreground-wedge line k∥ = m(z) k⊥ + k_buffer (Mpc⁻¹), m(z) as the instrument
/// computes it (wedge_angle_deg and wedge_buffer_per_mpc from the scenario group's attributes, the
/// cosmology and cone.cell_mpc from the stored campaign at its fiducial point): `above_wedge=`.
struct WedgeLine {
  WedgeLine(const Catalogue& catalogue, const std::string& scenario);
  double angle_deg = 90.0, buffer_per_mpc = 0.0, cell_mpc = 0.0;
  double slope(double z) const;
  bool above(double kperp_mpc, double kpar_mpc, double z) const;

 private:
  std::shared_ptr<const cosmo::Cosmology> cosmology_;
};

/// Done entries of one point, sorted by realisation. Pending entries are an
/// InputError unless allow_incomplete; failed ones are skipped with a warning.
std::vector<std::size_t> done_entries(const Catalogue& cat, std::int64_t point, bool allow_incomplete,
                                      const std::string& what);

/// The fiducial design point: the only one with role `fiducial`, or `chosen`.
std::int64_t fiducial_point(const Catalogue& cat, std::optional<std::int64_t> chosen);

/// The campaign's `[analysis] select` list, read from the catalogue's campaign text (empty if none).
std::vector<std::string> campaign_selects(const Catalogue& cat);

/// Every --select resolved; none given: the campaign's `[analysis] select`,
/// else one "all" selection.
std::vector<Selection> selections(const Catalogue& cat, const std::vector<std::string>& texts);

/// Drop columns that are NaN in every row of `reference` (bins without a kept mode,
/// DESIGN.md §5) or, with drop_constant, constant there (k = 0 terms), with a one-line
/// note naming them in the selection and the log; a NaN in some rows only is an
/// InputError. `others` lose the same columns. `what` names a row in messages.
void drop_degenerate(const Catalogue& cat, Selection& sel, Eigen::MatrixXd& reference,
                     std::vector<Eigen::MatrixXd*> others, bool drop_constant = true,
                     const std::string& what = "fiducial realisation");

/// Condition number of the correlation matrix (scale-free: coefficients of very
/// different sizes do not raise it) above which covariance and fisher refuse a
/// selection (docs/analysis.md, "Conditioning"); above warn_condition they warn.
inline constexpr double max_condition = 1e6;
inline constexpr double warn_condition = 1e4;

/// Condition numbers of a selection's covariance and its correlation matrix, and a
/// one-line cause for a large one: more coefficients than realisations, a (near)
/// zero-variance coefficient, P and delta2 of one bin together, or the coefficients
/// that carry the near-null direction (each named).
struct Conditioning {
  double covariance = 0, correlation = 0;
  std::string cause;
  /// A coefficient whose spread is below 1e-6 of the median spread of its kernel (and
  /// quantity) in the selection: rounding residue of an emptied bin, not a measurement.
  /// Refused like an ill-conditioned correlation (its correlation hides it).
  bool vanishing = false;
};
Conditioning conditioning(const Catalogue& cat, const Selection& sel, const Eigen::MatrixXd& cov, std::size_t n);
/// Warn above warn_condition; above max_condition an InputError with the cause and the
/// ways out (--shrink, fewer coefficients, more realisations).
void check_conditioning(const Conditioning& c, const std::string& selection);

/// Names cell (row, column) of a loaded data matrix for messages: the entry
/// (point, realisation) and the coefficient (scenario/kernel, unit, axes).
using CellNamer = std::function<std::string(Eigen::Index row, Eigen::Index col)>;
/// The namer for X = cat.load(sel, entries).
CellNamer cell_namer(const Catalogue& cat, const Selection& sel, const std::vector<std::size_t>& entries);
/// Why a coefficient can be NaN, in the kernel's terms (an empty Fourier bin,
/// a moment of a constant slice, ...), for column `col` of `sel`.
std::string nan_cause(const Catalogue& cat, const Selection& sel, Eigen::Index col);

/// A transform fitted on the fiducial rows and applied to any rows.
struct Transformer {
  Transform kind = Transform::none;
  Eigen::VectorXd mean, sd;
  void fit(const Eigen::MatrixXd& fiducial);
  /// `where`, if given, names the first offending cell in an error.
  void apply(Eigen::MatrixXd& X, const std::string& what, const CellNamer& where = {}) const;
  std::string describe() const;
};

/// Refuse an inverse from too few realisations, saying how many are needed.
void require_realisations(std::size_t n, std::size_t p, const std::string& selection, bool shrink);

/// /<group>/selection: text, name, record and one label per element.
void write_selection(hid_t group, const Catalogue& cat, const Selection& sel);

/// Root attributes every output carries: tool, time, source catalogue.
void write_output_header(hid_t file, const Catalogue& cat, const std::string& kind);

/// Run python/plots/<script> with args; on failure warn and return false.
bool run_plot(const std::string& script, const std::vector<std::string>& args);

/// out.h5 → out<suffix>.png
std::string derived_png(const std::string& output, const std::string& suffix);

std::string now_utc();

/// The stencil around a fiducial point: one central-difference pair per
/// (parameter, step index), with realisation-matched done entries.
struct StencilPair {
  std::size_t param;
  std::int64_t step_index;
  std::int64_t plus, minus;       // design points
  double delta;                   // θ+ − θ− in Fisher coordinates (log10 for log parameters)
  std::vector<std::size_t> plus_entries, minus_entries;  // same realisation, row by row
};
struct Stencil {
  std::int64_t fiducial;
  std::vector<std::size_t> fiducial_entries;
  std::vector<std::size_t> params;     // parameters with a pair at the chosen step
  std::int64_t step_index;
  std::vector<StencilPair> pairs;      // every step index
  const StencilPair* find(std::size_t param, std::int64_t step) const;
  std::vector<std::int64_t> step_indices() const;
};
Stencil stencil(const Catalogue& cat, std::optional<std::int64_t> point, std::optional<std::int64_t> step_index,
                bool allow_incomplete);

/// Everything a Fisher forecast of one selection needs, after degenerate
/// columns are dropped and the transform applied.
struct FisherModel {
  Selection selection;
  Eigen::MatrixXd fiducial;          // n_fid × d rows
  std::vector<Eigen::MatrixXd> diff;  // per pair in stencil.pairs: (x+ − x−)/Δ per matched realisation
  Eigen::VectorXd mean;
  Eigen::MatrixXd cov, precision;    // precision includes the Hartlap factor (unless shrunk)
  double hartlap = 1;
  Conditioning conditioning;         // of cov
  Eigen::MatrixXd derivatives;       // d × n_fisher_params at the chosen step
  Eigen::MatrixXd fisher;
  Transformer transform;
};
/// `covariance_file`: take C from a `spinflip covariance` output (the group of
/// the same selection name, else a root `cov` dataset) instead of the fiducial sample.
FisherModel fisher_model(const Catalogue& cat, const Selection& sel, const Stencil& st, Transform transform,
                         bool shrink, const std::string& covariance_file = "");
/// Names in Fisher coordinates: "log10(name)" for log parameters.
std::string fisher_param_name(const Design& d, std::size_t i);

/// Row-major copies, as HDF5 stores them.
inline std::vector<double> flat(const Eigen::MatrixXd& m) {
  std::vector<double> out(static_cast<std::size_t>(m.size()));
  Eigen::Map<Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>>(out.data(), m.rows(), m.cols()) = m;
  return out;
}
inline std::vector<double> flat(const Eigen::VectorXd& v) { return {v.data(), v.data() + v.size()}; }

}  // namespace spinflip::analysis::detail
