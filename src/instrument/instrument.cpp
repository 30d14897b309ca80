#include "instrument/instrument.hpp"

#include <Random123/boxmuller.hpp>
#include <fftw3.h>
#if defined(__SSE__)
#include <xmmintrin.h>
#endif

#include <algorithm>
#include <cmath>
#include <complex>
#include <fstream>
#include <map>
#include <numbers>
#include <sstream>
#include <utility>
#include <limits>
#include <memory>
#include <filesystem>
#include <mutex>
#include <tuple>

#include "core/errors.hpp"
#include "fft/fft.hpp"
#include "instrument/internal.hpp"

namespace spinflip::instrument {
namespace {

constexpr double c_m_s = 299792458.0;
constexpr double c_km_s = 299792.458;
constexpr double nu21_MHz = 1420.405751768;
constexpr double sidereal_day_s = 86164.0905;  // Earth rotation period (common practice)
constexpr std::size_t min_wedge_chunk_cells = 8;

using core::KeySpec;
using core::ValueType;

struct FftwFree { void operator()(void* p) const { fftwf_free(p); } };

std::string key(const std::string& scenario, const char* leaf) { return "scenarios." + scenario + "." + leaf; }

}  // namespace

void declare_keys(core::Schema& s) {
  s.add_table("scenarios.*", "A named instrument scenario applied to every clean cone (resolution, noise, wedge).");
  const std::string p = "scenarios.*.";
  s.add({.path = p + "array", .type = ValueType::string, .default_value = std::string("builtin"),
         .choices = {"none", "builtin", "csv"},
         .doc = "station layout: none (every Fourier cell kept), the built-in core+outer generator, or a CSV file"});
  s.add({.path = p + "array_file", .type = ValueType::string, .default_value = std::string(""),
         .doc = "CSV of station east,north,up in metres (array = \"csv\"), relative to the campaign file"});
  s.add({.path = p + "stations", .type = ValueType::integer, .default_value = std::int64_t{48}, .min = 2,
         .max = 4096, .doc = "number of stations of the built-in layout"});
  s.add({.path = p + "station_diameter_m", .type = ValueType::real, .default_value = 30.0, .unit = "m",
         .min = 0.0, .min_exclusive = true, .doc = "station diameter (effective area π d²/4)"});
  s.add({.path = p + "core_radius_m", .type = ValueType::real, .default_value = 200.0, .unit = "m", .min = 0.0,
         .min_exclusive = true, .doc = "radius of the compact core (built-in layout, 60% of the stations)"});
  s.add({.path = p + "outer_radius_m", .type = ValueType::real, .default_value = 1000.0, .unit = "m",
         .min = 0.0, .min_exclusive = true, .doc = "outer radius of the sparse region (built-in layout)"});
  s.add({.path = p + "latitude_deg", .type = ValueType::real, .default_value = -30.0, .unit = "deg",
         .min = -90.0, .max = 90.0, .doc = "site latitude"});
  s.add({.path = p + "declination_deg", .type = ValueType::real, .default_value = -30.0, .unit = "deg",
         .min = -90.0, .max = 90.0, .doc = "declination of the tracked field"});
  s.add({.path = p + "hours_per_day", .type = ValueType::real, .default_value = 6.0, .unit = "h", .min = 0.0,
         .max = 24.0, .min_exclusive = true, .doc = "hours the field is tracked per day (centred on transit)"});
  s.add({.path = p + "integration_s", .type = ValueType::real, .default_value = 60.0, .unit = "s", .min = 0.0,
         .min_exclusive = true, .doc = "integration time of one snapshot"});
  s.add({.path = p + "observing_hours", .type = ValueType::real, .default_value = 1000.0, .unit = "h",
         .min = 0.0, .min_exclusive = true, .doc = "total observing time (days = observing_hours / hours_per_day)"});
  s.add({.path = p + "receiver_temperature_K", .type = ValueType::real, .default_value = 100.0, .unit = "K",
         .min = 0.0, .doc = "receiver temperature; T_sys = T_rcv + 60 K (ν/300 MHz)^-2.55"});
  s.add({.path = p + "noise", .type = ValueType::boolean, .default_value = false,
         .doc = "add a thermal-noise realisation (needs an array)"});
  s.add({.path = p + "cross_power", .type = ValueType::boolean, .default_value = false,
         .doc = "power spectra free of noise bias: the cross-power of two independent noise realisations of each "
                "entry (needs noise = true; other kernels measure the first realisation)"});
  s.add({.path = p + "wedge", .type = ValueType::boolean, .default_value = false,
         .doc = "remove the foreground wedge k∥ < m(z) k⊥ + buffer on the LOS chunks"});
  s.add({.path = p + "taper", .type = ValueType::string, .default_value = std::string("none"),
         .choices = {"none", "gaussian"},
         .doc = "imaging weight on the uv grid, multiplying signal and noise of each cell: none, or a Gaussian in uv distance"});
  s.add({.path = p + "taper_fwhm_wavelengths", .type = ValueType::real, .default_value = 1000.0, .unit = "wavelengths",
         .min = 0.0, .min_exclusive = true,
         .doc = "FWHM of the Gaussian taper (taper = \"gaussian\") in uv distance; weight 1/2 at half of it"});
  s.add({.path = p + "wedge_angle_deg", .type = ValueType::real, .default_value = 90.0, .unit = "deg",
         .min = 0.0, .max = 90.0, .doc = "angle θ of the wedge (90: horizon)"});
  s.add({.path = p + "wedge_buffer_per_mpc", .type = ValueType::real, .default_value = 0.0, .unit = "1/Mpc",
         .min = 0.0, .doc = "k∥ buffer added above the wedge line"});

  s.add_table("slices", "2D images at a frequency cadence for the slice kernels.");
  s.add({.path = "slices.cadence_MHz", .type = ValueType::real, .default_value = 5.0, .unit = "MHz", .min = 0.0,
         .min_exclusive = true, .doc = "spacing of the slice centres, from the top of the band down"});
  s.add({.path = "slices.width_MHz", .type = ValueType::real, .default_value = 0.5, .unit = "MHz", .min = 0.0,
         .min_exclusive = true, .doc = "channel width each slice is averaged over"});
  s.add_table("chunks", "3D sub-volumes along the line of sight for the 3D kernels and the wedge cut.");
  s.add({.path = "chunks.bandwidth_MHz", .type = ValueType::real, .default_value = 8.0, .unit = "MHz", .min = 0.0,
         .min_exclusive = true, .doc = "bandwidth of one chunk"});
}

// ---------------------------------------------------------------- arrays

std::vector<Station> read_array_csv(const std::string& path) {
  std::ifstream in(path);
  if (!in) throw IoError("array_file '" + path + "': cannot be opened");
  std::vector<Station> out;
  std::string line;
  std::size_t n = 0;
  bool header_allowed = true;
  while (std::getline(in, line)) {
    ++n;
    const auto first = line.find_first_not_of(" \t\r");
    if (first == std::string::npos || line[first] == '#') continue;
    std::string t = line.substr(first);
    while (!t.empty() && (t.back() == '\r' || t.back() == ' ')) t.pop_back();
    if (header_allowed && t == "east,north,up") { header_allowed = false; continue; }
    header_allowed = false;
    std::array<double, 3> v{};
    std::stringstream ss(t);
    std::string field;
    int count = 0;
    bool ok = true;
    while (std::getline(ss, field, ',')) {
      if (count >= 3) { ok = false; break; }
      try {
        std::size_t used = 0;
        v[count] = std::stod(field, &used);
        if (field.find_first_not_of(" \t", used) != std::string::npos || !std::isfinite(v[count])) ok = false;
      } catch (const std::exception&) {
        ok = false;
      }
      ++count;
    }
    if (!ok || count != 3)
      throw InputError(path + ":" + std::to_string(n) + ": expected 'east,north,up' in metres (three numbers), got '" +
                       t + "'");
    for (const auto& s : out)
      if (s.east_m == v[0] && s.north_m == v[1] && s.up_m == v[2])
        throw InputError(path + ":" + std::to_string(n) + ": duplicate station position '" + t + "'");
    out.push_back({v[0], v[1], v[2]});
  }
  if (out.size() < 2)
    throw InputError(path + ": " + std::to_string(out.size()) + " station(s); an interferometer needs at least 2");
  return out;
}

std::vector<Station> builtin_array(std::size_t stations, double core_radius_m, double outer_radius_m,
                                   double station_diameter_m) {
  // Sunflower (Vogel) spirals: a filled compact core with 60% of the stations and a
  // sparser annulus out to outer_radius_m; deterministic, no two stations at one spot.
  const std::size_t n_core = std::max<std::size_t>(2, stations * 3 / 5);
  const std::size_t n_outer = stations - std::min(stations, n_core);
  const double golden = std::numbers::pi * (3.0 - std::sqrt(5.0));
  std::vector<Station> out;
  for (std::size_t i = 0; i < std::min(stations, n_core); ++i) {
    const double r = core_radius_m * std::sqrt((static_cast<double>(i) + 0.5) / static_cast<double>(n_core));
    out.push_back({r * std::cos(golden * static_cast<double>(i)), r * std::sin(golden * static_cast<double>(i)), 0.0});
  }
  for (std::size_t i = 0; i < n_outer; ++i) {
    const double f = (static_cast<double>(i) + 0.5) / static_cast<double>(n_outer);
    const double r = std::sqrt(core_radius_m * core_radius_m + f * (outer_radius_m * outer_radius_m - core_radius_m * core_radius_m));
    out.push_back({r * std::cos(golden * static_cast<double>(i) + 1.0), r * std::sin(golden * static_cast<double>(i) + 1.0), 0.0});
  }
  for (std::size_t i = 0; i < out.size(); ++i)
    for (std::size_t j = i + 1; j < out.size(); ++j)
      if (std::hypot(out[i].east_m - out[j].east_m, out[i].north_m - out[j].north_m) < station_diameter_m)
        throw ConfigError("built-in array: " + std::to_string(stations) + " stations of " +
                          std::to_string(station_diameter_m) + " m do not fit in core_radius_m = " +
                          std::to_string(core_radius_m) + " / outer_radius_m = " + std::to_string(outer_radius_m) +
                          " without overlapping; enlarge the radii or use fewer stations");
  return out;
}

std::vector<std::array<double, 2>> snapshot_uv_m(const std::vector<Station>& st, double latitude_deg,
                                                 double declination_deg, double ha) {
  // Local (east, north, up) -> equatorial (X, Y, Z), then (u, v) for hour angle H and
  // declination δ: Thompson, Moran & Swenson, Interferometry and Synthesis in Radio
  // Astronomy, eqs. 4.1 and 4.4 (from memory).
  const double phi = latitude_deg * std::numbers::pi / 180.0, dec = declination_deg * std::numbers::pi / 180.0;
  const double sh = std::sin(ha), ch = std::cos(ha), sd = std::sin(dec), cd = std::cos(dec);
  std::vector<std::array<double, 2>> out;
  out.reserve(st.size() * (st.size() - 1) / 2);
  for (std::size_t i = 0; i < st.size(); ++i)
    for (std::size_t j = i + 1; j < st.size(); ++j) {
      const double e = st[j].east_m - st[i].east_m, n = st[j].north_m - st[i].north_m, u = st[j].up_m - st[i].up_m;
      const double X = std::cos(phi) * u - std::sin(phi) * n, Y = e, Z = std::sin(phi) * u + std::cos(phi) * n;
      out.push_back({sh * X + ch * Y, -sd * ch * X + sd * sh * Y + cd * Z});
    }
  return out;
}

double wedge_slope(double distance_mpc, double hubble_km_s_mpc, double z, double angle_deg) {
  return distance_mpc * hubble_km_s_mpc * std::sin(angle_deg * std::numbers::pi / 180.0) / (c_km_s * (1.0 + z));
}

double system_temperature_K(double receiver_K, double freq_MHz) {
  return receiver_K + 60.0 * std::pow(freq_MHz / 300.0, -2.55);  // common practice
}

// ---------------------------------------------------------------- scenario

namespace {
// Frequency width of each LOS cell (Hz), from the neighbouring cell centres.
std::vector<double> cell_bandwidth_Hz(const ConeGeometry& g) {
  const std::size_t n = g.freq_MHz.size();
  std::vector<double> out(n);
  for (std::size_t k = 0; k < n; ++k) {
    const std::size_t a = k == 0 ? 0 : k - 1, b = k + 1 == n ? n - 1 : k + 1;
    out[k] = std::abs(g.freq_MHz[a] - g.freq_MHz[b]) / static_cast<double>(b - a) * 1e6;
  }
  return out;
}

void check_geometry(const ConeGeometry& g) {
  const std::size_t n = g.shape[2];
  if (g.shape[0] != g.shape[1] || g.shape[0] < 2 || n < 2 || g.z.size() != n || g.freq_MHz.size() != n ||
      g.distance_mpc.size() != n || !(g.cell_mpc > 0))
    throw InternalError("instrument: cone geometry inconsistent with its shape");
}
}  // namespace

Scenario::Scenario(Settings settings, std::uint32_t index, std::vector<std::vector<float>> uv_time_s,
                   std::vector<double> wedge_slopes, const ConeGeometry& g)
    : settings_(std::move(settings)), index_(index), n_perp_(g.shape[0]), n_los_(g.shape[2]),
      slopes_(std::move(wedge_slopes)) {
  check_geometry(g);
  if (!uv_time_s.empty()) {
    const std::size_t cells = n_perp_ * n_perp_;
    if (uv_time_s.size() != n_los_) throw InternalError("instrument: uv coverage has the wrong number of LOS cells");
    uv_time_.resize(cells * n_los_);
    for (std::size_t k = 0; k < n_los_; ++k) {
      if (uv_time_s[k].size() != cells) throw InternalError("instrument: uv coverage has the wrong grid size");
      for (std::size_t q = 0; q < cells; ++q) uv_time_[k * cells + q] = uv_time_s[k][q];
    }
  }
  const auto bw = cell_bandwidth_Hz(g);
  const double area = std::numbers::pi * 0.25 * settings_.station_diameter_m * settings_.station_diameter_m;
  sigma_unit_.resize(n_los_);
  sigma_unit_f_.resize(n_los_);
  for (std::size_t k = 0; k < n_los_; ++k) {
    // docs/instrument.md eq. (N3): σ of Re/Im of the pixel-sum DFT of one uv cell,
    // times sqrt(t): 1e3 T_sys λ² / (A_e θ_pix² sqrt(2 Δν)).
    const double lambda = c_m_s / (g.freq_MHz[k] * 1e6);
    const double theta_pix = g.cell_mpc / g.distance_mpc[k];
    sigma_unit_[k] = 1e3 * system_temperature_K(settings_.receiver_temperature_K, g.freq_MHz[k]) * lambda * lambda /
                     (area * theta_pix * theta_pix * std::sqrt(2.0 * bw[k]));
    sigma_unit_f_[k] = static_cast<float>(sigma_unit_[k]);
  }
  if (settings_.taper == "gaussian") {
    // w(u) = exp(−4 ln2 u² / FWHM²), a Gaussian of that FWHM in uv distance u = |m| Δu
    // wavelengths, Δu = D_c / (N Δ) at this LOS cell (common practice). It factorises
    // over the two grid axes, so one table per LOS cell holds it.
    taper_.resize(n_los_ * n_perp_);
    const double fwhm = settings_.taper_fwhm_wavelengths;
    for (std::size_t k = 0; k < n_los_; ++k) {
      const double du = g.distance_mpc[k] / (static_cast<double>(n_perp_) * g.cell_mpc);
      for (std::size_t i = 0; i < n_perp_; ++i) {
        const double u = static_cast<double>(core::fft_index(i, n_perp_)) * du;
        taper_[k * n_perp_ + i] = static_cast<float>(std::exp(-4.0 * std::numbers::ln2 * u * u / (fwhm * fwhm)));
      }
    }
  } else if (settings_.taper != "none") {
    throw InternalError("instrument: unknown taper '" + settings_.taper + "'");
  }
}

double Scenario::taper_weight(std::size_t k, std::size_t i, std::size_t j) const {
  if (taper_.empty()) return 1.0;
  return static_cast<double>(taper_[k * n_perp_ + i] * taper_[k * n_perp_ + j]);
}

core::Array2<float> Scenario::uv_time_s(std::size_t k) const {
  core::Array2<float> out(n_perp_, n_perp_, std::numeric_limits<float>::infinity());
  if (!uv_time_.empty())
    for (std::size_t q = 0; q < n_perp_ * n_perp_; ++q) out.data[q] = uv_time_[k * n_perp_ * n_perp_ + q];
  return out;
}

double Scenario::noise_sigma_mK(std::size_t k, double t) const { return sigma_unit_[k] / std::sqrt(t); }

namespace {
// Plans for one cone shape come from the project's one planner (src/fft: measured,
// shared wisdom, so every rank runs the same plan) and are run on fresh buffers of
// the same alignment. The work buffer is LOS-major, [k][i][j] with rows padded to
// 2(N/2+1) floats, so the transverse transforms are contiguous batched 2D
// transforms. The wedge's LOS transforms run one mode's chunk at a time on a small
// contiguous scratch (rows of los_row(len) complex, so every row has the alignment
// of the scratch): a strided batch over whole planes is several times slower for
// chunk lengths with large prime factors.
constexpr std::size_t los_block = 64;  // modes gathered per pass over a chunk's planes

std::size_t los_row(std::size_t len) { return (len + 3) / 4 * 4; }  // 32-byte rows

struct ApplyPlans {
  fft::Plan fwd, inv;
  std::map<std::size_t, std::pair<fft::Plan, fft::Plan>> los;  // chunk length -> (forward, backward)
};

// Asked for on every apply (a cache lookup): the planner may have been given a new
// wisdom since, and handles keep each plan alive while it runs.
// scratch: an fftwf_alloc'd buffer of at least los_row(chunk) complex (the LOS plans' alignment).
ApplyPlans apply_plans(std::size_t N, std::size_t L, std::size_t chunk, float* buf, fftwf_complex* scratch) {
  const std::size_t H = N / 2 + 1;
  auto* c = reinterpret_cast<fft::cfloat*>(buf);
  ApplyPlans p{fft::plan_r2c_2d_many(N, N, L, buf, 2 * H, 2 * N * H, c, H, N * H),
               fft::plan_c2r_2d_many(N, N, L, c, H, N * H, buf, 2 * H, 2 * N * H), {}};
  auto* t = reinterpret_cast<fft::cfloat*>(scratch);
  if (chunk > 0)
    for (std::size_t a = 0; a < L; a += chunk) {
      const std::size_t len = std::min(chunk, L - a);
      if (p.los.count(len)) continue;
      p.los.emplace(len, std::pair<fft::Plan, fft::Plan>(
                             fft::plan_c2c_1d_many(len, 1, t, 1, 0, t, 1, 0, fft::Direction::forward),
                             fft::plan_c2c_1d_many(len, 1, t, 1, 0, t, 1, 0, fft::Direction::inverse)));
    }
  return p;
}

constexpr std::size_t tile = 16;

// Copy a tile between the cone ([q][k], q = i N + j, k contiguous) and the LOS-major
// buffer ([k][i][j], rows of `row` floats). Four q of one row × four k move as one
// 4×4 register transpose: element-wise copies with either side strided by a page
// or more cost three times as much. Pure copies, so the bytes do not depend on the path.
template <bool to_buffer>
void transpose_tile(float* cone, float* buf, std::size_t N, std::size_t L, std::size_t row, std::size_t q0,
                    std::size_t q1, std::size_t k0, std::size_t k1) {
  const std::size_t plane = N * row;
  const auto scalar = [&](std::size_t q, std::size_t ka) {
    float* b = buf + (q / N) * row + q % N;
    float* c = cone + q * L;
    for (std::size_t k = ka; k < k1; ++k) {
      if constexpr (to_buffer) b[k * plane] = c[k];
      else c[k] = b[k * plane];
    }
  };
  std::size_t q = q0;
  for (; q < q1; q += 4) {
    if (q + 4 > q1 || q % N + 4 > N) break;
    std::size_t k = k0;
#if defined(__SSE__)
    float* b = buf + (q / N) * row + q % N;
    float* c = cone + q * L;
    for (; k + 4 <= k1; k += 4) {
      if constexpr (to_buffer) {
        __m128 r0 = _mm_loadu_ps(c + k), r1 = _mm_loadu_ps(c + L + k), r2 = _mm_loadu_ps(c + 2 * L + k),
               r3 = _mm_loadu_ps(c + 3 * L + k);
        _MM_TRANSPOSE4_PS(r0, r1, r2, r3);
        _mm_storeu_ps(b + k * plane, r0);
        _mm_storeu_ps(b + (k + 1) * plane, r1);
        _mm_storeu_ps(b + (k + 2) * plane, r2);
        _mm_storeu_ps(b + (k + 3) * plane, r3);
      } else {
        __m128 r0 = _mm_loadu_ps(b + k * plane), r1 = _mm_loadu_ps(b + (k + 1) * plane),
               r2 = _mm_loadu_ps(b + (k + 2) * plane), r3 = _mm_loadu_ps(b + (k + 3) * plane);
        _MM_TRANSPOSE4_PS(r0, r1, r2, r3);
        _mm_storeu_ps(c + k, r0);
        _mm_storeu_ps(c + L + k, r1);
        _mm_storeu_ps(c + 2 * L + k, r2);
        _mm_storeu_ps(c + 3 * L + k, r3);
      }
    }
#endif
    for (std::size_t d = 0; d < 4; ++d) scalar(q + d, k);
  }
  for (; q < q1; ++q) scalar(q, k0);
}

// cone [i][j][k] -> buf [k][i][j] (rows of `row` floats), in tiles that stay in cache.
void to_los_major(const float* cone, float* buf, std::size_t N, std::size_t L, std::size_t row) {
  const std::size_t P = N * N;
  for (std::size_t q0 = 0; q0 < P; q0 += tile)
    for (std::size_t k0 = 0; k0 < L; k0 += tile)
      transpose_tile<true>(const_cast<float*>(cone), buf, N, L, row, q0, std::min(P, q0 + tile), k0,
                           std::min(L, k0 + tile));
}

void from_los_major(const float* buf, float* cone, std::size_t N, std::size_t L, std::size_t row) {
  const std::size_t P = N * N;
  for (std::size_t q0 = 0; q0 < P; q0 += tile)
    for (std::size_t k0 = 0; k0 < L; k0 += tile)
      transpose_tile<false>(cone, const_cast<float*>(buf), N, L, row, q0, std::min(P, q0 + tile), k0,
                            std::min(L, k0 + tile));
}
}  // namespace

namespace {
// One Philox block gives the normal pairs of 4 consecutive LOS cells of one mode.
std::array<float, 8> noise_normals(const rng::CounterRng& rng, std::uint64_t index) {
  std::array<float, 8> z{};
  const auto b = rng.bits(index);
  for (std::size_t w = 0; w < 4; ++w) {
    const auto r = r123::boxmuller(static_cast<std::uint32_t>(b[w]), static_cast<std::uint32_t>(b[w] >> 32));
    z[2 * w] = r.x;
    z[2 * w + 1] = r.y;
  }
  return z;
}
}  // namespace

void Scenario::apply(core::Array3<float>& cone, const ConeGeometry& g, const rng::EntryKey& key,
                     bool second_noise) const {
  const std::size_t N = n_perp_, L = n_los_, H = N / 2 + 1, M = N * H, P = N * N;
  if (cone.shape != g.shape || g.shape[0] != N || g.shape[2] != L)
    throw InternalError("instrument: cone shape does not match the scenario's geometry");
  const std::size_t C = settings_.wedge ? settings_.chunk_cells : 0;
  // The work buffers are kept per thread between calls: a fresh one costs its page
  // faults on every cone (as much as a transform). Peak memory is unchanged.
  thread_local std::unique_ptr<float, FftwFree> buffer;
  thread_local std::size_t buffer_size = 0;
  if (buffer_size < 2 * M * L) {
    buffer.reset();
    buffer.reset(fftwf_alloc_real(2 * M * L));
    if (!buffer) throw InternalError("instrument: out of memory for the transform buffer");
    buffer_size = 2 * M * L;
  }
  thread_local std::unique_ptr<fftwf_complex, FftwFree> scratch;
  thread_local std::size_t scratch_size = 0;
  if (C > 0 && scratch_size < los_block * los_row(C)) {
    scratch.reset();
    scratch.reset(fftwf_alloc_complex(los_block * los_row(C)));
    if (!scratch) throw InternalError("instrument: out of memory for the wedge scratch buffer");
    scratch_size = los_block * los_row(C);
  }
  float* buf = buffer.get();
  auto* S = reinterpret_cast<std::complex<float>*>(buf);
  const ApplyPlans plans = apply_plans(N, L, C, buf, scratch.get());

  to_los_major(cone.data.data(), buf, N, L, 2 * H);
  plans.fwd.r2c(buf, reinterpret_cast<fft::cfloat*>(buf));

  // uv mask and noise on the spectrum, with the normalisation of the inverse
  // transforms to come (1/N² transverse, and 1/len of a LOS chunk where one is made).
  const rng::CounterRng rng(key, second_noise ? rng::cross_noise_stream(index_) : rng::noise_stream(index_));
  const bool noise = settings_.noise && !uv_time_.empty();
  const float sqrt2 = std::sqrt(2.0f);
  const float inv_P = 1.0f / static_cast<float>(P);
  // Noise is keyed by the global (group of 4 LOS cells, mode) index of the canonical
  // member of the Hermitian pair, so ñ(-k) = conj ñ(k) whoever draws it.
  struct Mode {
    std::size_t i, j, full, canon;
    bool self_conjugate;
    float im_sign;
  };
  const auto mode_of = [N, H](std::size_t mode) {
    const std::size_t i = mode / H, j = mode % H;
    const std::size_t full = i * N + j, partner = ((N - i) % N) * N + (N - j) % N;
    const std::size_t canon = std::min(full, partner);
    return Mode{i, j, full, canon, full == partner, full == canon ? 1.0f : -1.0f};
  };
  // The taper weighs signal and noise alike, as an imaging weight does.
  const auto tapered = [&](float scale, std::size_t k, const Mode& md) {
    return taper_.empty() ? scale : scale * (taper_[k * N + md.i] * taper_[k * N + md.j]);
  };
  // Observed value of spectrum cell v at LOS cell k; z holds the normals of k's group
  // (drawn on demand, group tracks which group they belong to).
  const auto observe = [&](std::complex<float> v, std::size_t k, const Mode& md, float scale,
                           std::array<float, 8>& z, std::size_t& group) -> std::complex<float> {
    if (uv_time_.empty()) return v * tapered(scale, k, md);
    const float t = uv_time_[k * P + md.full];
    if (!(t > 0)) return 0;  // unobserved: no RNG either
    if (noise) {
      if (group != k / 4) {
        group = k / 4;
        z = noise_normals(rng, static_cast<std::uint64_t>(group) * P + md.canon);
      }
      const float* zk = z.data() + 2 * (k % 4);
      const float sig = sigma_unit_f_[k] / std::sqrt(t);
      v += md.self_conjugate ? std::complex<float>(sqrt2 * sig * zk[0], 0.0f)
                             : std::complex<float>(sig * zk[0], md.im_sign * sig * zk[1]);
    }
    return v * tapered(scale, k, md);
  };
  constexpr std::size_t no_group = std::numeric_limits<std::size_t>::max();

  if (C == 0) {
    for (std::size_t k0 = 0; k0 < L; k0 += 4) {
      const std::size_t k1 = std::min(L, k0 + 4);
      for (std::size_t m = 0; m < M; ++m) {
        if (m == 0) {  // interferometers do not see the mean
          for (std::size_t k = k0; k < k1; ++k) S[k * M] = 0;
          continue;
        }
        const Mode md = mode_of(m);
        std::array<float, 8> z{};
        std::size_t group = no_group;
        for (std::size_t k = k0; k < k1; ++k) S[k * M + m] = observe(S[k * M + m], k, md, inv_P, z, group);
      }
    }
  } else {
    // Wedge: per chunk and mode, the cut removes every k∥ index with |m| < n_cut. A
    // mode cut entirely (most of large k⊥) is zeroed without transforms, and one not
    // cut at all is left alone; the rest are gathered, a block of modes at a time, into
    // the contiguous scratch, observed, transformed along the LOS, cut and put back.
    std::vector<double> kperp(M);
    for (std::size_t i = 0; i < N; ++i)
      for (std::size_t j = 0; j < H; ++j) kperp[i * H + j] = detail::transverse_k(i, j, N, g.cell_mpc);
    fftwf_complex* T = scratch.get();
    auto* Tc = reinterpret_cast<std::complex<float>*>(T);
    std::array<std::size_t, los_block> n_cut{}, row{};
    std::array<Mode, los_block> modes{};
    std::array<std::array<float, 8>, los_block> z{};
    std::array<std::size_t, los_block> group{};
    for (std::size_t a = 0; a < L; a += C) {
      const std::size_t len = std::min(C, L - a), ld = los_row(len), top = len / 2;  // top = largest |m|
      const double slope = slopes_[a + len / 2];
      const double dk_par = 2.0 * std::numbers::pi / (static_cast<double>(len) * g.cell_mpc);
      const float scale_los = inv_P / static_cast<float>(len);
      const auto& [fwd, bwd] = plans.los.at(len);
      for (std::size_t q0 = 0; q0 < M; q0 += los_block) {
        const std::size_t many = std::min(los_block, M - q0);
        std::size_t rows = 0;
        for (std::size_t b = 0; b < many; ++b) {
          const std::size_t q = q0 + b;
          // |m| is cut when dk_par |m| < m(z) k⊥ + buffer (the same test as the docs'
          // k∥ < m(z) k⊥ + k_buffer); count the cut |m| = 0, 1, … from a first guess.
          const std::size_t n = detail::wedge_cut(slope * kperp[q] + settings_.wedge_buffer_per_mpc, dk_par, top);
          n_cut[b] = q == 0 ? top + 1 : n;  // k⊥ = 0: interferometers do not see the mean
          modes[b] = mode_of(q);
          group[b] = no_group;
          row[b] = n_cut[b] > 0 && n_cut[b] <= top ? rows++ : los_block;
        }
        for (std::size_t k = a; k < a + len; ++k) {
          std::complex<float>* plane = S + k * M + q0;
          for (std::size_t b = 0; b < many; ++b) {
            if (n_cut[b] > top) plane[b] = 0;
            else if (n_cut[b] == 0) plane[b] = observe(plane[b], k, modes[b], inv_P, z[b], group[b]);
            else Tc[row[b] * ld + (k - a)] = observe(plane[b], k, modes[b], scale_los, z[b], group[b]);
          }
        }
        for (std::size_t b = 0; b < many; ++b) {
          if (row[b] == los_block) continue;
          auto* r = reinterpret_cast<fft::cfloat*>(T + row[b] * ld);
          fwd.c2c(r, r);
          std::complex<float>* rc = Tc + row[b] * ld;
          std::fill(rc, rc + n_cut[b], std::complex<float>(0));
          std::fill(rc + (len - n_cut[b] + 1), rc + len, std::complex<float>(0));
          bwd.c2c(r, r);
        }
        if (rows > 0)
          for (std::size_t k = a; k < a + len; ++k) {
            std::complex<float>* plane = S + k * M + q0;
            for (std::size_t b = 0; b < many; ++b)
              if (row[b] != los_block) plane[b] = Tc[row[b] * ld + (k - a)];
          }
      }
    }
  }

  plans.inv.c2r(reinterpret_cast<fft::cfloat*>(buf), buf);
  from_los_major(buf, cone.data.data(), N, L, 2 * H);
}

// ---------------------------------------------------------------- from config

namespace {
std::vector<std::vector<float>> grid_coverage(const std::vector<Station>& st, const Settings& s,
                                              const ConeGeometry& g) {
  const std::size_t N = g.shape[0], L = g.shape[2];
  const long half = static_cast<long>((N - 1) / 2);  // |m| ≤ half keeps m and -m on the grid
  const double omega = 2.0 * std::numbers::pi / sidereal_day_s;
  const double track_s = s.hours_per_day * 3600.0;
  const auto n_snap = static_cast<std::size_t>(std::max(1.0, std::floor(track_s / s.integration_s)));
  const double days = s.observing_hours / s.hours_per_day;
  const auto per_visit = static_cast<float>(s.integration_s * days);
  std::vector<std::vector<std::array<double, 2>>> snaps(n_snap);
  for (std::size_t t = 0; t < n_snap; ++t) {
    const double ha = omega * ((static_cast<double>(t) + 0.5) * s.integration_s - 0.5 * track_s);
    snaps[t] = snapshot_uv_m(st, s.latitude_deg, s.declination_deg, ha);
  }
  // Every snapshot's baselines in two flat arrays: the loop below runs over them once per LOS cell.
  std::vector<double> bu, bv;
  for (const auto& snap : snaps)
    for (const auto& b : snap) {
      bu.push_back(b[0]);
      bv.push_back(b[1]);
    }
  // floor(x + 0.5) without a libm call (exact for |x| < 2^63), and fftfreq index without a division.
  const auto nearest = [](double x) {
    const double t = x + 0.5;
    auto m = static_cast<long>(t);
    if (static_cast<double>(m) > t) --m;
    return m;
  };
  const auto n_l = static_cast<long>(N);
  const auto idx = [n_l](long a) { return static_cast<std::size_t>(a < 0 ? a + n_l : a); };
  std::vector<std::vector<float>> out(L, std::vector<float>(N * N, 0.0f));
  for (std::size_t k = 0; k < L; ++k) {
    // Grid cells per metre of baseline: (ν/c) · (N Δ / D_c), since du = D_c / (N Δ).
    const double scale = g.freq_MHz[k] * 1e6 / c_m_s * static_cast<double>(N) * g.cell_mpc / g.distance_mpc[k];
    float* cell = out[k].data();
    for (std::size_t b = 0; b < bu.size(); ++b) {
      const long m1 = nearest(bu[b] * scale), m2 = nearest(bv[b] * scale);
      if (m1 > half || m1 < -half || m2 > half || m2 < -half) continue;
      cell[idx(m1) * N + idx(m2)] += per_visit;
      cell[idx(-m1) * N + idx(-m2)] += per_visit;  // the conjugate visibility
    }
  }
  return out;
}
}  // namespace

std::size_t chunk_cells(const core::Config& c, const ConeGeometry& g) {
  check_geometry(g);
  const double bw = c.real("chunks.bandwidth_MHz");
  const double cell = std::abs(g.freq_MHz.front() - g.freq_MHz.back()) / static_cast<double>(g.shape[2] - 1);
  const auto n = static_cast<std::size_t>(std::max(1.0, std::round(bw / cell)));
  if (n > g.shape[2])
    throw ConfigError(c.location("chunks.bandwidth_MHz") + ": chunks.bandwidth_MHz = " + core::to_text(c.value("chunks.bandwidth_MHz")) +
                      " is wider than the cone's band of " + std::to_string(cell * static_cast<double>(g.shape[2])) + " MHz");
  return n;
}

namespace {
// grid = false checks and builds everything but the uv coverage (spinflip plan's checks).
std::vector<Scenario> build_scenarios(const core::Config& c, const std::function<double(double)>& hubble,
                                      const ConeGeometry& g, bool grid) {
  check_geometry(g);
  std::vector<Scenario> out;
  std::uint32_t index = 0;
  for (const auto& name : c.table_names("scenarios")) {
    Settings s;
    s.name = name;
    s.array = c.string(key(name, "array"));
    s.station_diameter_m = c.real(key(name, "station_diameter_m"));
    s.latitude_deg = c.real(key(name, "latitude_deg"));
    s.declination_deg = c.real(key(name, "declination_deg"));
    s.hours_per_day = c.real(key(name, "hours_per_day"));
    s.integration_s = c.real(key(name, "integration_s"));
    s.observing_hours = c.real(key(name, "observing_hours"));
    s.receiver_temperature_K = c.real(key(name, "receiver_temperature_K"));
    s.noise = c.boolean(key(name, "noise"));
    s.wedge = c.boolean(key(name, "wedge"));
    s.cross_power = c.boolean(key(name, "cross_power"));
    if (s.cross_power && !s.noise)
      throw ConfigError(c.location(key(name, "cross_power")) + ": " + key(name, "cross_power") +
                        " = true needs noise = true (without noise the two observations are the same cone)");
    s.wedge_angle_deg = c.real(key(name, "wedge_angle_deg"));
    s.wedge_buffer_per_mpc = c.real(key(name, "wedge_buffer_per_mpc"));
    s.taper = c.string(key(name, "taper"));
    s.taper_fwhm_wavelengths = c.real(key(name, "taper_fwhm_wavelengths"));
    if (s.noise && s.array == "none")
      throw ConfigError(c.location(key(name, "noise")) + ": " + key(name, "noise") +
                        " = true needs an array (array = \"builtin\" or \"csv\"), not array = \"none\"");
    if (s.integration_s > s.hours_per_day * 3600.0)
      throw ConfigError(c.location(key(name, "integration_s")) + ": " + key(name, "integration_s") +
                        " is longer than the daily track hours_per_day");
    std::vector<Station> stations;
    if (s.array == "csv") {
      const std::string f = c.string(key(name, "array_file"));
      if (f.empty())
        throw ConfigError(c.location(key(name, "array")) + ": " + key(name, "array") +
                          " = \"csv\" needs " + key(name, "array_file"));
      std::filesystem::path path(f);
      if (path.is_relative()) path = c.directory() / path;
      stations = read_array_csv(path.string());
    } else if (s.array == "builtin") {
      stations = builtin_array(static_cast<std::size_t>(c.integer(key(name, "stations"))),
                               c.real(key(name, "core_radius_m")), c.real(key(name, "outer_radius_m")),
                               s.station_diameter_m);
    }
    std::vector<double> slopes(g.shape[2]);
    for (std::size_t k = 0; k < slopes.size(); ++k)
      slopes[k] = wedge_slope(g.distance_mpc[k], hubble(g.z[k]), g.z[k], s.wedge_angle_deg);
    if (s.wedge) {
      s.chunk_cells = chunk_cells(c, g);
      if (s.chunk_cells < min_wedge_chunk_cells)
        throw ConfigError(c.location("chunks.bandwidth_MHz") + ": " + key(name, "wedge") +
                          " = true: a wedge cut needs chunks of at least " + std::to_string(min_wedge_chunk_cells) +
                          " line-of-sight cells, chunks.bandwidth_MHz = " +
                          core::to_text(c.value("chunks.bandwidth_MHz")) + " gives " + std::to_string(s.chunk_cells));
    }
    for (const char* leaf : {"array", "array_file", "stations", "station_diameter_m", "core_radius_m",
                             "outer_radius_m", "latitude_deg", "declination_deg", "hours_per_day", "integration_s",
                             "observing_hours", "receiver_temperature_K", "noise", "cross_power", "wedge", "wedge_angle_deg",
                             "wedge_buffer_per_mpc", "taper", "taper_fwhm_wavelengths"})
      s.attributes.emplace_back(leaf, c.value(key(name, leaf)));
    auto coverage = s.array == "none" || !grid ? std::vector<std::vector<float>>{} : grid_coverage(stations, s, g);
    out.emplace_back(std::move(s), index++, std::move(coverage), std::move(slopes), g);
  }
  return out;
}
}  // namespace

std::vector<Scenario> scenarios_from(const core::Config& c, const std::function<double(double)>& hubble,
                                     const ConeGeometry& g) {
  return build_scenarios(c, hubble, g, true);
}

std::vector<Settings> scenario_settings_from(const core::Config& c, const std::function<double(double)>& hubble,
                                             const ConeGeometry& g) {
  std::vector<Settings> out;
  for (const auto& s : build_scenarios(c, hubble, g, false)) out.push_back(s.settings());
  return out;
}

// ---------------------------------------------------------------- slices and chunks

std::vector<Unit> slice_units(const core::Config& c, const ConeGeometry& g) {
  check_geometry(g);
  const double cadence = c.real("slices.cadence_MHz"), width = c.real("slices.width_MHz");
  if (cadence < width)
    throw ConfigError(c.location("slices.cadence_MHz") + ": slices.cadence_MHz = " + core::to_text(c.value("slices.cadence_MHz")) +
                      " is finer than slices.width_MHz = " + core::to_text(c.value("slices.width_MHz")) +
                      "; slices would overlap (allowed: cadence ≥ width)");
  const auto& f = g.freq_MHz;  // decreasing with LOS index
  std::vector<Unit> out;
  for (double centre = f.front() - 0.5 * width; centre - 0.5 * width >= f.back() - 1e-9; centre -= cadence) {
    std::size_t a = 0;
    while (a < f.size() && f[a] >= centre + 0.5 * width) ++a;
    std::size_t b = a;
    while (b < f.size() && f[b] > centre - 0.5 * width) ++b;
    if (b == a) {  // narrower than a cell: the nearest cell
      a = static_cast<std::size_t>(std::min_element(f.begin(), f.end(), [&](double x, double y) {
                                     return std::abs(x - centre) < std::abs(y - centre);
                                   }) - f.begin());
      b = a + 1;
    }
    out.push_back({a, b, centre, nu21_MHz / centre - 1.0});
  }
  return out;
}

std::vector<Unit> chunk_units(const core::Config& c, const ConeGeometry& g) {
  const std::size_t n = chunk_cells(c, g);
  std::vector<Unit> out;
  for (std::size_t a = 0; a + n <= g.shape[2]; a += n) {
    const std::size_t mid = a + n / 2;
    out.push_back({a, a + n, g.freq_MHz[mid], g.z[mid]});
  }
  return out;
}

core::Array2<float> extract_slice(const core::Array3<float>& cone, const Unit& u) {
  const std::size_t N0 = cone.shape[0], N1 = cone.shape[1];
  core::Array2<float> out(N0, N1);
  const double w = 1.0 / static_cast<double>(u.los_end - u.los_begin);
  for (std::size_t i = 0; i < N0; ++i)
    for (std::size_t j = 0; j < N1; ++j) {
      double s = 0;
      for (std::size_t k = u.los_begin; k < u.los_end; ++k) s += cone(i, j, k);
      out(i, j) = static_cast<float>(s * w);
    }
  return out;
}

core::Array3<float> extract_chunk(const core::Array3<float>& cone, const Unit& u) {
  const std::size_t N0 = cone.shape[0], N1 = cone.shape[1], n = u.los_end - u.los_begin;
  core::Array3<float> out(N0, N1, n);
  for (std::size_t i = 0; i < N0; ++i)
    for (std::size_t j = 0; j < N1; ++j)
      std::copy_n(&cone(i, j, u.los_begin), n, &out(i, j, 0));
  return out;
}

}  // namespace spinflip::instrument
