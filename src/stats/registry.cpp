// The one declaration of every [stats.*] key, and the table → kernel registry.
#include <sstream>

#include "stats/internal.hpp"

namespace spinflip::stats {

using core::KeySpec;
using core::ValueType;

namespace {

void declare_power(core::Schema& s, const std::string& t, const std::string& what, const std::string& unit) {
  s.add_table(t, what);
  s.add({.path = t + ".bins", .type = ValueType::integer, .default_value = std::int64_t{12}, .min = 1, .max = 100000,
         .doc = "number of |k| bins"});
  s.add({.path = t + ".k_min_mpc", .type = ValueType::real, .default_value = 0.05, .unit = unit, .min = 0.0,
         .doc = "lower edge of the first bin (0 allowed with linear bins)"});
  s.add({.path = t + ".k_max_mpc", .type = ValueType::real, .default_value = 2.0, .unit = unit, .min = 0.0,
         .min_exclusive = true, .doc = "upper edge of the last bin"});
  s.add({.path = t + ".log_bins", .type = ValueType::boolean, .default_value = true,
         .doc = "geometric bin edges (else linear)"});
}

void declare_bispectrum(core::Schema& s, const std::string& t, const std::string& what) {
  s.add_table(t, what);
  s.add({.path = t + ".k1_mpc", .type = ValueType::real_array, .unit = "1/Mpc", .min = 0.0, .min_exclusive = true,
         .doc = "|k1| of each triangle (length-1 arrays are broadcast)"});
  s.add({.path = t + ".k2_mpc", .type = ValueType::real_array, .unit = "1/Mpc", .min = 0.0, .min_exclusive = true,
         .doc = "|k2| of each triangle"});
  s.add({.path = t + ".angle_deg", .type = ValueType::real_array, .unit = "deg", .min = 0.0, .max = 180.0,
         .doc = "angle between the vectors k1 and k2; k3 = |k1 + k2| (120 with k1 = k2: equilateral)"});
  s.add({.path = t + ".shell_fraction", .type = ValueType::real, .default_value = 0.2, .min = 0.0,
         .max = 2.0, .min_exclusive = true,
         .doc = "shell width as a fraction of its centre: modes with |k − k_i| < shell_fraction k_i / 2"});
  s.add({.path = t + ".quantity", .type = ValueType::string, .default_value = std::string("both"),
         .choices = {"both", "bispectrum", "normalised"},
         .doc = "B, B/(P1P2+P2P3+P3P1), or both (B first)"});
}

void declare_moments(core::Schema& s, const std::string& t, const std::string& what) {
  s.add_table(t, what);
  s.add({.path = t + ".histogram_edges", .type = ValueType::real_array, .default_value = std::vector<double>{},
         .unit = "mK", .doc = "increasing bin edges of an optional histogram (fraction of cells per bin)"});
}

}  // namespace

void declare_keys(core::Schema& s) {
  s.add_table("stats", "Statistic kernels measured on every slice or chunk (one sub-table per kernel).");
  declare_power(s, "stats.power", "Spherical power spectrum P(k) and delta2(k) of 3D chunks.", "1/Mpc");
  declare_power(s, "stats.slice_power", "2D power spectrum P(k) and delta2(k) of slices.", "1/Mpc");

  const std::string c = "stats.cylindrical";
  s.add_table(c, "Cylindrical power spectrum P(k_perp, k_par) of 3D chunks.");
  s.add({.path = c + ".kperp_bins", .type = ValueType::integer, .default_value = std::int64_t{8}, .min = 1,
         .max = 10000, .doc = "number of k_perp bins"});
  s.add({.path = c + ".kpar_bins", .type = ValueType::integer, .default_value = std::int64_t{8}, .min = 1,
         .max = 10000, .doc = "number of k_par bins"});
  s.add({.path = c + ".kperp_min_mpc", .type = ValueType::real, .default_value = 0.05, .unit = "1/Mpc", .min = 0.0,
         .doc = "lower edge of the first k_perp bin (0 allowed with linear bins)"});
  s.add({.path = c + ".kperp_max_mpc", .type = ValueType::real, .default_value = 1.0, .unit = "1/Mpc", .min = 0.0,
         .min_exclusive = true, .doc = "upper edge of the last k_perp bin"});
  s.add({.path = c + ".kpar_min_mpc", .type = ValueType::real, .default_value = 0.05, .unit = "1/Mpc", .min = 0.0,
         .doc = "lower edge of the first k_par bin (0 allowed with linear bins: the k_par = 0 plane)"});
  s.add({.path = c + ".kpar_max_mpc", .type = ValueType::real, .default_value = 2.0, .unit = "1/Mpc", .min = 0.0,
         .min_exclusive = true, .doc = "upper edge of the last k_par bin"});
  s.add({.path = c + ".log_bins", .type = ValueType::boolean, .default_value = true,
         .doc = "geometric bin edges on both axes (else linear)"});

  const std::string w = "stats.scattering";
  s.add_table(w, "Wavelet scattering coefficients S0, S1, S2 of slices (Gabor filters, docs/design.md §6).");
  s.add({.path = w + ".scales", .type = ValueType::integer, .default_value = std::int64_t{5}, .min = 1, .max = 16,
         .doc = "number of dyadic scales J (a slice needs at least 2^J cells per axis)"});
  s.add({.path = w + ".orientations", .type = ValueType::integer, .default_value = std::int64_t{8}, .min = 1,
         .max = 64, .doc = "number of orientations L over [0, π)"});
  s.add({.path = w + ".reduce", .type = ValueType::string, .default_value = std::string("none"),
         .choices = {"none", "rotation"}, .doc = "rotation: average S1 over l and S2 over l1 at fixed l2 - l1"});
  s.add({.path = w + ".normalise", .type = ValueType::boolean, .default_value = false,
         .doc = "divide S2(j1,l1,j2,l2) by S1(j1,l1)"});
  s.add({.path = w + ".xi0", .type = ValueType::real, .default_value = 3.0 * M_PI / 4.0, .unit = "rad/cell",
         .min = 0.0, .min_exclusive = true, .doc = "centre frequency of scale 0 (xi_j = xi0 2^-j)"});
  s.add({.path = w + ".sigma0", .type = ValueType::real, .default_value = 0.8, .unit = "cell", .min = 0.0,
         .min_exclusive = true, .doc = "spatial width of scale 0 (sigma_j = sigma0 2^j)"});
  s.add({.path = w + ".slant", .type = ValueType::real, .default_value = 0.0, .min = 0.0,
         .doc = "aspect s of the envelope (k_perp^2 / s^2); 0 means the contract default 4 / orientations"});
  s.add({.path = w + ".crop", .type = ValueType::boolean, .default_value = true,
         .doc = "work on Fourier planes cropped to each filter's support (same result within 1e-4)"});

  detail::declare_scattering3d(s);

  declare_bispectrum(s, "stats.bispectrum", "FFT shell-estimator bispectrum of 3D chunks for listed triangles.");
  declare_bispectrum(s, "stats.slice_bispectrum", "FFT shell-estimator bispectrum of slices for listed triangles.");
  declare_moments(s, "stats.moments", "One-point moments (mean, variance, skewness, excess kurtosis) of slices.");
  declare_moments(s, "stats.chunk_moments", "One-point moments of 3D chunks.");
}

std::vector<std::unique_ptr<Kernel>> kernels_from(const core::Config& config) {
  std::vector<std::unique_ptr<Kernel>> out;
  if (config.has_table("stats.power")) out.push_back(detail::make_power(config, "stats.power", UnitKind::chunk));
  if (config.has_table("stats.slice_power"))
    out.push_back(detail::make_power(config, "stats.slice_power", UnitKind::slice));
  if (config.has_table("stats.cylindrical")) out.push_back(detail::make_cylindrical(config));
  if (config.has_table("stats.scattering")) out.push_back(detail::make_scattering(config));
  if (config.has_table("stats.scattering3d")) out.push_back(detail::make_scattering3d(config));
  if (config.has_table("stats.bispectrum"))
    out.push_back(detail::make_bispectrum(config, "stats.bispectrum", UnitKind::chunk));
  if (config.has_table("stats.slice_bispectrum"))
    out.push_back(detail::make_bispectrum(config, "stats.slice_bispectrum", UnitKind::slice));
  if (config.has_table("stats.moments"))
    out.push_back(detail::make_moments(config, "stats.moments", UnitKind::slice));
  if (config.has_table("stats.chunk_moments"))
    out.push_back(detail::make_moments(config, "stats.chunk_moments", UnitKind::chunk));
  return out;
}

std::size_t Geometry::n_cells() const {
  std::size_t n = 1;
  for (auto s : shape) n *= s;
  return n;
}

void check_finite(const float* data, std::size_t n, const std::string& what) {
  for (std::size_t i = 0; i < n; ++i)
    if (!std::isfinite(data[i])) {
      std::ostringstream os;
      os << what << ": value " << data[i] << " at flat index " << i
         << " is not finite (kernels need finite numbers; mask or fill it first)";
      throw InputError(os.str());
    }
}

namespace detail {

std::vector<double> bin_edges(double lo, double hi, std::size_t bins, bool log_bins) {
  std::vector<double> e(bins + 1);
  for (std::size_t i = 0; i <= bins; ++i) {
    const double f = static_cast<double>(i) / static_cast<double>(bins);
    e[i] = log_bins ? lo * std::pow(hi / lo, f) : lo + (hi - lo) * f;
  }
  e[bins] = hi;
  return e;
}

KeptView::KeptView(const KeptModes& k, const Geometry& g)
    : kept(k), two_d(g.shape.size() == 2), n2(g.shape.back()) {
  const std::size_t cells = g.shape[0] * g.shape[1];
  if ((!k.kpar_cut.empty() && k.kpar_cut.size() != cells) || (!k.weight2.empty() && k.weight2.size() != cells))
    throw InternalError("kept modes: " + std::to_string(k.kpar_cut.size()) + " cut and " +
                        std::to_string(k.weight2.size()) + " weight entries for a unit of " + std::to_string(cells) +
                        " transverse cells " + shape_text(g.shape));
}

std::string shape_text(const std::vector<std::size_t>& shape) {
  std::string s = "(";
  for (std::size_t i = 0; i < shape.size(); ++i) s += (i ? ", " : "") + std::to_string(shape[i]);
  return s + ")";
}

void require_dims(const std::string& kernel, const Geometry& g, UnitKind kind) {
  const std::size_t want = kind == UnitKind::slice ? 2 : 3;
  if (g.shape.size() != want)
    throw InputError("stats." + kernel + ": needs a " + std::to_string(want) + "D unit, got shape " +
                     shape_text(g.shape));
  for (auto n : g.shape)
    if (n < 2) throw InputError("stats." + kernel + ": every axis needs at least 2 cells, got shape " + shape_text(g.shape));
}

}  // namespace detail
}  // namespace spinflip::stats
