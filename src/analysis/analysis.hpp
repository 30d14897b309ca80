// Analysis of a finished (or partly finished) catalogue: coefficient
// selection, covariance, Fisher forecasts and training-set export. Reads the
// layout of docs/catalogue.md with the HDF5 C API; never runs kernels.
// The selection syntax and every output layout are documented in docs/analysis.md.
#pragma once
#include <Eigen/Dense>

#include <cstdint>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <vector>

namespace spinflip::analysis {

struct Design {
  std::vector<std::string> names, units, labels, role;  // labels: for plots (default: names)
  std::vector<int> log;  // 1: the design samples log10 of the parameter
  Eigen::VectorXd min, max, fiducial;
  Eigen::MatrixXd points;  // n_points × n_params, physical values
  std::vector<std::int64_t> stencil_param, stencil_step_index, seed_point;
  std::vector<double> stencil_step;
};

/// One /stats/<scenario>/<kernel> group.
struct Block {
  std::string scenario, kernel, unit_kind;
  std::size_t n_units = 0, n_coeff = 0;
  std::vector<double> unit_freq_MHz, unit_z;
  std::map<std::string, std::vector<double>> axes;  // per-coefficient axes
  std::map<std::string, std::string> attrs;         // kernel configuration, as text
};

/// One coefficient of a data vector.
struct Element {
  std::size_t block, unit, coeff;
  /// reduce=rotation: the value is the mean over these coefficients (coeff is
  /// the first), the S2 orientation offset δ = (l2 − l1) mod L in `delta`.
  std::vector<std::size_t> average = {};
  long delta = -1;
};

/// A resolved --select: which coefficients, in data-vector order, and why.
struct Selection {
  std::string name, text;
  std::vector<Element> elements;
  std::vector<std::string> notes;  // e.g. columns dropped as constant
};

class Catalogue {
 public:
  explicit Catalogue(const std::string& path);
  ~Catalogue();
  Catalogue(Catalogue&&) noexcept;
  const std::string& path() const;
  const Design& design() const;
  const std::vector<std::int64_t>& entry_point() const;
  const std::vector<std::int64_t>& entry_realisation() const;
  const std::vector<std::int64_t>& entry_status() const;
  const std::vector<Block>& blocks() const;
  /// One row per entry (in the order given) of the selection's data vector.
  Eigen::MatrixXd load(const Selection& selection, const std::vector<std::size_t>& entries) const;
  std::int64_t hdf5_file() const;  // the open file id (provenance copies)
  struct Impl;  // opaque; public only so the reader's helpers can fill it

 private:
  std::unique_ptr<Impl> impl_;
};

/// Parse one --select text (docs/analysis.md) against a catalogue. `index`
/// numbers default names. Unknown kernels, scenarios or axes, and a selection
/// that matches nothing, are InputErrors naming what is allowed.
Selection select(const Catalogue& catalogue, const std::string& text, std::size_t index);
/// One human-readable line per element ("deep/power u3 f=150.2MHz z=8.45 k_mean=0.12").
std::vector<std::string> element_labels(const Catalogue& catalogue, const Selection& selection);
/// A few lines saying what went in (blocks, units, coefficient counts, notes).
std::string selection_record(const Catalogue& catalogue, const Selection& selection);

enum class Transform { none, log, standardise };
Transform parse_transform(const std::string& text);

struct CommonOptions {
  std::string catalogue;
  std::vector<std::string> selects;  // empty: everything
  Transform transform = Transform::none;
  bool allow_incomplete = false;
  std::optional<std::int64_t> point;  // fiducial point, when several exist
  bool plot = true;
  std::string plot_path;  // empty: derived from the output path
};

struct CovarianceOptions : CommonOptions {
  std::string output;
  bool shrink = false;  // Ledoit & Wolf (2004)
};
struct FisherOptions : CommonOptions {
  std::string output;
  std::optional<std::int64_t> step_index;  // default: 0
  double tolerance = 0.1;  // convergence flag: |σ_alt/σ − 1| beyond this
  bool combined = false;   // Coulton & Wandelt (2023) combined estimator
  bool shrink = false;
  std::string covariance_file;  // C from a covariance output (or a known C) instead of the fiducial sample
};
struct ExportOptions : CommonOptions {
  std::string output;
  std::vector<std::string> roles = {"training", "list"};
  std::vector<double> fractions = {0.8, 0.1, 0.1};
  std::uint64_t seed = 1;
  bool score = false;  // add score compression (needs fiducial + stencils)
  std::optional<std::int64_t> step_index;
};

/// spinflip plot: one --select drawn against redshift (or against k / j at one
/// redshift), across design points coloured by a parameter or as the fiducial
/// mean ± 1σ, scenarios overlaid (docs/analysis.md, "Plots").
struct PlotOptions {
  std::string catalogue, output = "statistics.png";
  std::vector<std::string> selects;  // at most one; empty: Δ² of the power kernel
  std::string against = "z";         // "z" or "coefficient"
  std::string by;                    // parameter colouring the design (default: the first)
  bool fiducial = false;             // fiducial mean ± 1σ instead of the design points
  std::vector<std::string> roles = {"training", "list"};
  std::optional<double> at_z;        // against coefficient: the redshift (default: the middle unit)
  std::string format;                // png or pdf (default: from the extension, else png)
  std::string data_output;           // also keep the plotted numbers here (HDF5); empty: not kept
  bool allow_incomplete = false;
  std::optional<std::int64_t> point;
};

/// The verbs. Each prints its summary on stdout and writes its output file;
/// user errors throw InputError/IoError (exit 2).
void run_covariance(const CovarianceOptions& options);
void run_fisher(const FisherOptions& options);
void run_export(const ExportOptions& options);
void run_statistic_plot(const PlotOptions& options);

}  // namespace spinflip::analysis
