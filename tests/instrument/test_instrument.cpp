#include <gtest/gtest.h>
#include <fftw3.h>

#include <cmath>
#include <complex>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <numbers>
#include <random>

#include "core/errors.hpp"
#include "instrument/instrument.hpp"
#include "stats/stats.hpp"

using namespace spinflip;
using namespace spinflip::instrument;

namespace {
constexpr double kB = 1.380649e-23;  // J/K (CODATA, exact)
constexpr double c_m_s = 299792458.0;

double toy_hubble(double z) { return 67.66 * std::sqrt(0.3111 * std::pow(1 + z, 3) + 0.6889); }

// A cone geometry from a toy flat ΛCDM (dz/dD = H/c), LOS cell 0 at z0.
ConeGeometry make_geometry(std::size_t n, std::size_t l, double cell, double z0) {
  ConeGeometry g;
  g.shape = {n, n, l};
  g.cell_mpc = cell;
  double z = 0, d = 0;
  const double step = 0.05;
  while (z < z0) { z += toy_hubble(z) / 299792.458 * step; d += step; }
  for (std::size_t k = 0; k < l; ++k) {
    g.z.push_back(z);
    g.distance_mpc.push_back(d);
    g.freq_MHz.push_back(1420.405751768 / (1 + z));
    for (int s = 0; s < 20; ++s) { z += toy_hubble(z) / 299792.458 * cell / 20; d += cell / 20; }
  }
  return g;
}

core::Schema schema() {
  core::Schema s;
  declare_keys(s);
  return s;
}
const core::Schema& the_schema() {
  static const core::Schema s = schema();
  return s;
}
core::Config config(const std::string& text, const std::string& name = "c.toml") {
  return core::Config::from_string(text, name, the_schema());
}

template <class F>
std::string error_of(F&& f) {
  try {
    f();
  } catch (const Error& e) {
    EXPECT_EQ(e.exit_status(), 2);
    return e.what();
  }
  return "";
}

Settings noise_settings() {
  Settings s;
  s.name = "noisy";
  s.noise = true;
  s.station_diameter_m = 30.0;
  s.receiver_temperature_K = 100.0;
  return s;
}

// Forward r2c 3D transform of a float cube (FFTW, unnormalised).
std::vector<std::complex<float>> fft3(const core::Array3<float>& a) {
  auto in = a.data;
  const std::size_t h = a.shape[2] / 2 + 1;
  std::vector<std::complex<float>> out(a.shape[0] * a.shape[1] * h);
  fftwf_plan p = fftwf_plan_dft_r2c_3d(static_cast<int>(a.shape[0]), static_cast<int>(a.shape[1]),
                                       static_cast<int>(a.shape[2]), in.data(),
                                       reinterpret_cast<fftwf_complex*>(out.data()), FFTW_ESTIMATE);
  fftwf_execute(p);
  fftwf_destroy_plan(p);
  return out;
}
}  // namespace

// Every pair once per snapshot: N(N-1)/2 (the conjugate is implied, never listed).
TEST(UvCoverage, BaselineCountPerSnapshot) {
  for (std::size_t n : {2u, 7u, 48u}) {
    const auto st = builtin_array(n, 200.0, 1000.0, 14.0);
    ASSERT_EQ(st.size(), n);
    EXPECT_EQ(snapshot_uv_m(st, -30, -30, 0.3).size(), n * (n - 1) / 2);
  }
}

// Gridded coverage is Hermitian: t(m) = t(-m) in every cell, every frequency.
TEST(UvCoverage, GriddedTimeIsHermitianAndScalesWithFrequency) {
  const auto g = make_geometry(32, 16, 4.0, 8.0);
  auto c = config("[scenarios.a]\nstations = 20\nhours_per_day = 4\nintegration_s = 600\n");
  const auto sc = scenarios_from(c, toy_hubble, g);
  ASSERT_EQ(sc.size(), 1u);
  double total0 = 0;
  for (std::size_t k : {0u, 15u}) {
    const auto t = sc[0].uv_time_s(k);
    double total = 0;
    for (std::size_t i = 0; i < 32; ++i)
      for (std::size_t j = 0; j < 32; ++j) {
        EXPECT_EQ(t(i, j), t((32 - i) % 32, (32 - j) % 32));
        total += t(i, j);
      }
    EXPECT_GT(total, 0);
    if (k == 0) total0 = total;
    else EXPECT_LE(total, total0 * 1.000001);  // lower ν: shorter baselines in λ, same D_c scale -> fewer lost off-grid
  }
}

// An east–west baseline of length L traces u² + (v / sin δ)² = (L/λ)², with
// u = L cos H, v = L sin δ sin H (Thompson, Moran & Swenson, Interferometry and
// Synthesis in Radio Astronomy, §4.2, from memory).
TEST(UvCoverage, EastWestBaselineTracesTextbookEllipse) {
  const std::vector<Station> st = {{0, 0, 0}, {100, 0, 0}};
  for (double dec : {-60.0, -30.0, 20.0}) {
    const double sd = std::sin(dec * std::numbers::pi / 180);
    for (double ha = -1.5; ha <= 1.5; ha += 0.25) {
      for (double lat : {-30.0, 45.0}) {  // an E–W baseline is independent of latitude
        const auto uv = snapshot_uv_m(st, lat, dec, ha);
        ASSERT_EQ(uv.size(), 1u);
        EXPECT_NEAR(uv[0][0], 100 * std::cos(ha), 1e-9);  // double rounding
        EXPECT_NEAR(uv[0][1], 100 * sd * std::sin(ha), 1e-9);
        EXPECT_NEAR(uv[0][0] * uv[0][0] + std::pow(uv[0][1] / sd, 2), 1e4, 1e-6);
      }
    }
  }
}

// Uniform coverage: image-plane rms per pixel from the radiometer equation, via
// the Jansky route (TMS ch. 6, from memory): per visibility and real/imag part
// σ_S = SEFD / sqrt(2 Δν t), SEFD = 2 k_B T_sys / A_e; to brightness per
// steradian × λ²/(2 k_B); to the pixel-sum DFT ÷ Ω_pix; Parseval over N²−1 modes.
TEST(ThermalNoise, ImagePlaneRmsMatchesRadiometerEquation) {
  const std::size_t N = 64, L = 16;
  const auto g = make_geometry(N, L, 3.0, 8.0);
  const double t = 3.6e5;
  std::vector<std::vector<float>> cover(L, std::vector<float>(N * N, static_cast<float>(t)));
  Scenario sc(noise_settings(), 0, cover, std::vector<double>(L, 0.0), g);
  core::Array3<float> cone(N, N, L, 0.0f);
  sc.apply(cone, g, {7, 0, 0});
  for (std::size_t k : {0u, 8u}) {
    double s2 = 0;
    for (std::size_t i = 0; i < N; ++i)
      for (std::size_t j = 0; j < N; ++j) s2 += static_cast<double>(cone(i, j, k)) * cone(i, j, k);
    const double rms = std::sqrt(s2 / static_cast<double>(N * N));
    const double nu = g.freq_MHz[k] * 1e6, lambda = c_m_s / nu;
    const double dnu = std::abs(g.freq_MHz[k + 1] - g.freq_MHz[k - (k > 0 ? 1 : 0)]) * 1e6 / (k > 0 ? 2 : 1);
    const double tsys = 100.0 + 60.0 * std::pow(nu / 300e6, -2.55);  // common practice
    const double area = std::numbers::pi * 15.0 * 15.0;
    const double sigma_S = 2 * kB * tsys / area / std::sqrt(2 * dnu * t);  // W m^-2 Hz^-1
    const double sigma_Tsr = sigma_S * lambda * lambda / (2 * kB);         // K sr
    const double omega_pix = std::pow(g.cell_mpc / g.distance_mpc[k], 2);
    const double sigma_dft = sigma_Tsr / omega_pix * 1e3;                  // mK, per real part
    const double expected = std::sqrt(2 * sigma_dft * sigma_dft * static_cast<double>(N * N - 1)) /
                            static_cast<double>(N * N);
    // 4096 pixels: sampling scatter of an rms is 1/sqrt(2·4096) ≈ 1.1%; 5% is > 4σ.
    EXPECT_NEAR(rms / expected, 1.0, 0.05) << "LOS cell " << k;
  }
}

// Noise-only cones through the built-in array: measured 3D power per mode,
// averaged in k⊥ annuli and over realisations, vs the analytic
// P_N = 1e6 D⁴ λ⁴ T_sys² / (N² Δ A_e² Δν t(k⊥)) mK² Mpc³ (docs/instrument.md eq. N5;
// McQuinn et al. 2006 / Parsons et al. 2012 form, from memory), white in k∥.
TEST(ThermalNoise, PowerSpectrumMatchesAnalytic) {
  const std::size_t N = 32, L = 32;
  const auto g = make_geometry(N, L, 4.0, 8.0);
  auto c = config("[scenarios.n]\nnoise = true\nstations = 40\nintegration_s = 300\n");
  const auto sc = scenarios_from(c, toy_hubble, g);
  const std::size_t H = L / 2 + 1;
  std::vector<double> meas(N, 0.0), ana(N, 0.0);
  std::vector<std::size_t> count(N, 0);
  const int realisations = 24;
  const double area = std::numbers::pi * 15.0 * 15.0, dl = g.cell_mpc;
  for (int r = 0; r < realisations; ++r) {
    core::Array3<float> cone(N, N, L, 0.0f);
    sc[0].apply(cone, g, {3, 0, static_cast<std::uint64_t>(r)});
    const auto F = fft3(cone);
    for (std::size_t i = 0; i < N; ++i)
      for (std::size_t j = 0; j < N; ++j) {
        // analytic per-mode P_N, averaged over the chunk's LOS cells (white in k∥)
        double p = 0;
        bool covered = true;
        for (std::size_t k = 0; k < L; ++k) {
          const double t = sc[0].uv_time_s(k)(i, j);
          if (!(t > 0)) { covered = false; break; }
          const double nu = g.freq_MHz[k] * 1e6, lambda = c_m_s / nu;
          const std::size_t a = k == 0 ? 0 : k - 1, b = k + 1 == L ? L - 1 : k + 1;
          const double dnu = std::abs(g.freq_MHz[a] - g.freq_MHz[b]) * 1e6 / static_cast<double>(b - a);
          const double tsys = 100.0 + 60.0 * std::pow(nu / 300e6, -2.55);
          p += 1e6 * std::pow(g.distance_mpc[k], 4) * std::pow(lambda, 4) * tsys * tsys /
               (static_cast<double>(N * N) * dl * area * area * dnu * t);
        }
        if (!covered) continue;
        p /= static_cast<double>(L);
        const auto bin = static_cast<std::size_t>(std::hypot(core::fft_index(i, N), core::fft_index(j, N)));
        for (std::size_t m = 0; m < H; ++m) {
          const double P = std::norm(F[(i * N + j) * H + m]) * std::pow(dl, 3) / static_cast<double>(N * N * L);
          meas[bin] += P;
          ana[bin] += p;
          ++count[bin];
        }
      }
  }
  int bins = 0;
  for (std::size_t b = 0; b < N; ++b) {
    if (count[b] < 8000) continue;  // ≥8000 mode-draws (half conjugate-paired): scatter ≲ 1.6%
    ++bins;
    EXPECT_NEAR(meas[b] / ana[b], 1.0, 0.05) << "k⊥ bin " << b << " modes " << count[b];
  }
  EXPECT_GE(bins, 3);
}

TEST(ThermalNoise, DeterministicPerEntryAndScenario) {
  const std::size_t N = 16, L = 8;
  const auto g = make_geometry(N, L, 3.0, 8.0);
  std::vector<std::vector<float>> cover(L, std::vector<float>(N * N, 1e5f));
  Scenario a(noise_settings(), 0, cover, std::vector<double>(L, 0.0), g);
  Scenario b(noise_settings(), 1, cover, std::vector<double>(L, 0.0), g);
  core::Array3<float> x(N, N, L, 0.0f), y(N, N, L, 0.0f), z(N, N, L, 0.0f);
  a.apply(x, g, {1, 2, 3});
  a.apply(y, g, {1, 2, 3});
  b.apply(z, g, {1, 2, 3});
  EXPECT_EQ(x.data, y.data);
  EXPECT_NE(x.data, z.data);
}

// Wedge: after filtering, every chunk mode with k∥ < m k⊥ + b is zero and every
// other mode (k⊥ > 0) equals the clean cone's mode (m(z) formula: DESIGN.md §5).
TEST(Wedge, ModesBelowLineZeroAboveUntouched) {
  const std::size_t N = 32, L = 48;
  const auto g = make_geometry(N, L, 3.0, 8.0);
  auto c = config("[chunks]\nbandwidth_MHz = 3.0\n[scenarios.w]\narray = \"none\"\nwedge = true\n"
                  "wedge_buffer_per_mpc = 0.05\n");
  const auto sc = scenarios_from(c, toy_hubble, g);
  const auto units = chunk_units(c, g);
  ASSERT_GE(units.size(), 2u);
  ASSERT_EQ(sc[0].settings().chunk_cells, units[0].los_end - units[0].los_begin);
  std::mt19937 gen(5);
  std::normal_distribution<float> nd(0, 10);
  core::Array3<float> cone(N, N, L);
  for (auto& v : cone.data) v = nd(gen);
  const auto clean = cone;
  sc[0].apply(cone, g, {1, 0, 0});
  int below = 0, above = 0;
  for (const auto& u : units) {
    const auto F0 = fft3(extract_chunk(clean, u)), F1 = fft3(extract_chunk(cone, u));
    const std::size_t len = u.los_end - u.los_begin, H = len / 2 + 1;
    const double slope = wedge_slope(g.distance_mpc[u.los_begin + len / 2], toy_hubble(g.z[u.los_begin + len / 2]),
                                     g.z[u.los_begin + len / 2], 90.0);
    double peak = 0;
    for (const auto& v : F0) peak = std::max(peak, static_cast<double>(std::abs(v)));
    for (std::size_t i = 0; i < N; ++i)
      for (std::size_t j = 0; j < N; ++j)
        for (std::size_t m = 0; m < H; ++m) {
          const double kperp = 2 * std::numbers::pi / (N * 3.0) * std::hypot(core::fft_index(i, N), core::fft_index(j, N));
          const double kpar = 2 * std::numbers::pi / (len * 3.0) * static_cast<double>(m);
          const auto a = F0[(i * N + j) * H + m], b = F1[(i * N + j) * H + m];
          if (kperp == 0 || kpar < slope * kperp + 0.05) {
            EXPECT_LT(std::abs(b), 1e-5 * peak);  // float rounding of two transforms
            ++below;
          } else {
            EXPECT_LT(std::abs(b - a), 1e-5 * peak);
            ++above;
          }
        }
  }
  EXPECT_GT(below, 100);
  EXPECT_GT(above, 100);
}

// Taper: on a cone that is one transverse plane wave in every LOS cell, a Gaussian
// uv taper scales that mode by w(u) = exp(−4 ln2 u²/FWHM²) (a Gaussian of that FWHM,
// common practice) at its uv distance u = |m| D_c / (N Δ) wavelengths (docs/instrument.md),
// evaluated per LOS cell, and leaves its shape alone; taper = "none" keeps it whole.
TEST(Taper, GaussianScalesAPlaneWaveByItsWeight) {
  const std::size_t N = 32, L = 16;
  const double cell = 3.0, fwhm = 800.0;
  const auto g = make_geometry(N, L, cell, 8.0);
  const auto sc = scenarios_from(config("[scenarios.t]\narray = \"none\"\ntaper = \"gaussian\"\n"
                                        "taper_fwhm_wavelengths = 800.0\n"
                                        "[scenarios.plain]\narray = \"none\"\n"),
                                 toy_hubble, g);
  ASSERT_EQ(sc.size(), 2u);
  const Scenario& t = sc[0].name() == "t" ? sc[0] : sc[1];
  const Scenario& p = sc[0].name() == "t" ? sc[1] : sc[0];
  ASSERT_EQ(t.settings().taper, "gaussian");
  ASSERT_EQ(p.settings().taper, "none");
  for (const auto& [mi, mj] : std::vector<std::pair<long, long>>{{3, 4}, {-7, 2}, {0, 9}}) {
    core::Array3<float> wave(N, N, L);
    for (std::size_t i = 0; i < N; ++i)
      for (std::size_t j = 0; j < N; ++j)
        for (std::size_t k = 0; k < L; ++k)
          wave(i, j, k) = static_cast<float>(
              10.0 * std::cos(2 * std::numbers::pi * static_cast<double>(mi * static_cast<long>(i) + mj * static_cast<long>(j)) / N));
    auto tapered = wave, plain = wave;
    t.apply(tapered, g, {1, 0, 0});
    p.apply(plain, g, {1, 0, 0});
    double w_min = 1, w_max = 0;
    for (std::size_t k = 0; k < L; ++k) {
      const double u = std::hypot(static_cast<double>(mi), static_cast<double>(mj)) * g.distance_mpc[k] / (N * cell);
      const double w = std::exp(-4 * std::log(2.0) * u * u / (fwhm * fwhm));
      w_min = std::min(w_min, w);
      w_max = std::max(w_max, w);
      const std::size_t i = static_cast<std::size_t>((mi + static_cast<long>(N)) % static_cast<long>(N));
      const std::size_t j = static_cast<std::size_t>((mj + static_cast<long>(N)) % static_cast<long>(N));
      EXPECT_NEAR(t.taper_weight(k, i, j), w, 1e-6 * w);  // float tables: rounding
      for (std::size_t i2 = 0; i2 < N; ++i2)
        for (std::size_t j2 = 0; j2 < N; ++j2) {
          // 1e-4 mK on 10 mK: float rounding of two 2D transforms
          EXPECT_NEAR(tapered(i2, j2, k), w * wave(i2, j2, k), 1e-4) << "mode " << mi << "," << mj << " k " << k;
          EXPECT_NEAR(plain(i2, j2, k), wave(i2, j2, k), 1e-4);
        }
    }
    // the weights tested are far from 0 and 1, and vary along the LOS (Δu ∝ D_c)
    EXPECT_GT(w_min, 0.02);
    EXPECT_LT(w_max, 0.9);
    EXPECT_GT(w_max - w_min, 1e-3);
  }
}

// The taper weighs the noise as it does the signal: the same noise realisation (same
// entry, same scenario index) with and without the taper differs, mode by mode of each
// LOS plane's 2D transform, by the taper weight (docs/instrument.md).
TEST(Taper, WeighsTheNoiseToo) {
  const std::size_t N = 16, L = 8;
  const auto g = make_geometry(N, L, 3.0, 8.0);
  std::vector<std::vector<float>> cover(L, std::vector<float>(N * N, 1e5f));
  Settings tapered_settings = noise_settings();
  tapered_settings.taper = "gaussian";
  tapered_settings.taper_fwhm_wavelengths = 600.0;
  const Scenario plain(noise_settings(), 0, cover, std::vector<double>(L, 0.0), g);
  const Scenario tapered(tapered_settings, 0, cover, std::vector<double>(L, 0.0), g);
  core::Array3<float> x(N, N, L, 0.0f), y(N, N, L, 0.0f);
  plain.apply(x, g, {1, 2, 3});
  tapered.apply(y, g, {1, 2, 3});
  const std::size_t H = N / 2 + 1;
  std::vector<float> plane(N * N);
  std::vector<std::complex<float>> a(N * H), b(N * H);
  const auto fft2 = [&](const core::Array3<float>& c, std::size_t k, std::vector<std::complex<float>>& out) {
    for (std::size_t q = 0; q < N * N; ++q) plane[q] = c(q / N, q % N, k);
    fftwf_plan pl = fftwf_plan_dft_r2c_2d(static_cast<int>(N), static_cast<int>(N), plane.data(),
                                          reinterpret_cast<fftwf_complex*>(out.data()), FFTW_ESTIMATE);
    fftwf_execute(pl);
    fftwf_destroy_plan(pl);
  };
  int weighed = 0;
  for (std::size_t k = 0; k < L; ++k) {
    fft2(x, k, a);
    fft2(y, k, b);
    double peak = 0;
    for (const auto& v : a) peak = std::max(peak, static_cast<double>(std::abs(v)));
    ASSERT_GT(peak, 0);
    for (std::size_t i = 0; i < N; ++i)
      for (std::size_t j = 0; j < H; ++j) {
        const double u = std::hypot(static_cast<double>(core::fft_index(i, N)), static_cast<double>(core::fft_index(j, N))) *
                         g.distance_mpc[k] / (static_cast<double>(N) * 3.0);
        const double w = std::exp(-4 * std::log(2.0) * u * u / (600.0 * 600.0));  // Gaussian of FWHM 600 (common practice)
        const auto va = a[i * H + j], vb = b[i * H + j];
        EXPECT_LT(std::abs(vb - static_cast<float>(w) * va), 1e-5 * peak);  // float rounding of four transforms
        if (std::abs(va) > 0.1 * peak && w < 0.9) ++weighed;
      }
  }
  EXPECT_GT(weighed, 50);  // the check saw many noise modes with a weight well below 1
}

TEST(Units, SlicesAndChunks) {
  const auto g = make_geometry(8, 200, 2.0, 7.0);
  auto c = config("[slices]\ncadence_MHz = 2.0\nwidth_MHz = 0.5\n[chunks]\nbandwidth_MHz = 4.0\n");
  const auto s = slice_units(c, g);
  ASSERT_GE(s.size(), 2u);
  EXPECT_NEAR(s[0].freq_MHz - s[1].freq_MHz, 2.0, 1e-9);
  for (const auto& u : s) {
    EXPECT_LT(u.los_begin, u.los_end);
    EXPECT_NEAR(u.z, 1420.405751768 / u.freq_MHz - 1, 1e-12);
    for (std::size_t k = u.los_begin; k < u.los_end; ++k) EXPECT_NEAR(g.freq_MHz[k], u.freq_MHz, 0.25 + 1e-9);
  }
  core::Array3<float> cone(8, 8, 200);
  for (std::size_t k = 0; k < 200; ++k) cone(3, 4, k) = static_cast<float>(k);
  const auto img = extract_slice(cone, s[1]);
  EXPECT_FLOAT_EQ(img(3, 4), 0.5f * static_cast<float>(s[1].los_begin + s[1].los_end - 1));
  const auto ch = chunk_units(c, g);
  ASSERT_GE(ch.size(), 2u);
  EXPECT_EQ(ch[1].los_begin, ch[0].los_end);
  EXPECT_EQ(extract_chunk(cone, ch[1])(3, 4, 0), static_cast<float>(ch[1].los_begin));
}

TEST(BadInput, OneLineErrorsNamingTheKey) {
  const auto g = make_geometry(16, 40, 3.0, 8.0);
  auto msg = error_of([&] { scenarios_from(config("[scenarios.x]\narray = \"none\"\nnoise = true\n"), toy_hubble, g); });
  EXPECT_NE(msg.find("scenarios.x.noise"), std::string::npos) << msg;
  msg = error_of([&] { scenarios_from(config("[scenarios.x]\narray = \"csv\"\n"), toy_hubble, g); });
  EXPECT_NE(msg.find("scenarios.x.array_file"), std::string::npos) << msg;
  msg = error_of([&] {
    scenarios_from(config("[chunks]\nbandwidth_MHz = 0.3\n[scenarios.x]\narray = \"none\"\nwedge = true\n"), toy_hubble, g);
  });
  EXPECT_NE(msg.find("a wedge cut needs chunks of at least"), std::string::npos) << msg;
  msg = error_of([&] { slice_units(config("[slices]\ncadence_MHz = 0.2\nwidth_MHz = 1.0\n"), g); });
  EXPECT_NE(msg.find("slices.cadence_MHz"), std::string::npos) << msg;
  msg = error_of([&] { config("[scenarios.x]\nlatitude_deg = 120\n"); });
  EXPECT_NE(msg.find("scenarios.x.latitude_deg"), std::string::npos) << msg;
  msg = error_of([&] { config("[scenarios.x]\ntaper = \"cosine\"\n"); });
  EXPECT_NE(msg.find("scenarios.x.taper"), std::string::npos) << msg;
  EXPECT_NE(msg.find("gaussian"), std::string::npos) << msg;  // names what is allowed
  for (const char* bad : {"0.0", "-250.0", "\"wide\""}) {
    msg = error_of([&] { config(std::string("[scenarios.x]\ntaper = \"gaussian\"\ntaper_fwhm_wavelengths = ") + bad + "\n"); });
    EXPECT_NE(msg.find("scenarios.x.taper_fwhm_wavelengths"), std::string::npos) << msg;
    EXPECT_EQ(msg.find('\n'), std::string::npos) << msg;
  }
  msg = error_of([&] { builtin_array(200, 20.0, 40.0, 30.0); });
  EXPECT_NE(msg.find("overlapping"), std::string::npos) << msg;
  for (const std::string& m : std::vector<std::string>{msg}) EXPECT_EQ(m.find('\n'), std::string::npos);

  const auto dir = std::filesystem::temp_directory_path() / "spinflip_instrument_test";
  std::filesystem::create_directories(dir);
  const auto write = [&](const std::string& name, const std::string& text) {
    std::ofstream(dir / name) << text;
    return (dir / name).string();
  };
  msg = error_of([&] { read_array_csv(write("bad.csv", "east,north,up\n0,0,0\n1,2\n")); });
  EXPECT_NE(msg.find("bad.csv:3"), std::string::npos) << msg;
  msg = error_of([&] { read_array_csv(write("word.csv", "0,0,0\n1,abc,0\n")); });
  EXPECT_NE(msg.find("word.csv:2"), std::string::npos) << msg;
  msg = error_of([&] { read_array_csv(write("dup.csv", "0,0,0\n# c\n5,5,0\n5,5,0\n")); });
  EXPECT_NE(msg.find("dup.csv:4: duplicate"), std::string::npos) << msg;
  msg = error_of([&] { read_array_csv(write("one.csv", "0,0,0\n")); });
  EXPECT_NE(msg.find("at least 2"), std::string::npos) << msg;
  const auto ok = read_array_csv(write("ok.csv", "# demo\neast,north,up\n0,0,0\n10.5,-3,1\n"));
  ASSERT_EQ(ok.size(), 2u);
  EXPECT_DOUBLE_EQ(ok[1].north_m, -3.0);
  // a csv scenario resolves the file relative to the campaign file
  auto c = core::Config::from_string("[scenarios.f]\narray = \"csv\"\narray_file = \"ok.csv\"\n",
                                     (dir / "campaign.toml").string(), the_schema());
  EXPECT_EQ(scenarios_from(c, toy_hubble, g).size(), 1u);
}

// ---------------------------------------------------------------- kept modes (DESIGN.md §5 "Observed modes")
namespace {
core::Config stats_config(const std::string& text) {
  static const core::Schema s = [] {
    core::Schema x;
    declare_keys(x);
    stats::declare_keys(x);
    return x;
  }();
  return core::Config::from_string(text, "k.toml", s);
}
std::vector<std::int64_t> ints(const std::vector<stats::Axis>& axes, const std::string& name) {
  for (const auto& a : axes)
    if (a.name == name) return std::get<std::vector<std::int64_t>>(a.values);
  return {};
}
}  // namespace

// A wedge-cut cone: the spherical power's n_modes is lower than the clean count exactly in
// the bins the wedge line crosses (brute force over the full grid with the analytic line
// k∥ < m(z) k⊥ + b, DESIGN.md §5), equal elsewhere; a bin wholly inside the wedge is NaN
// with n_modes 0; P is the mean of P̂ = ΔV |F|² / N over the kept modes (DESIGN.md §6).
// The independent numpy check of the same is tests/stats/check_kept_modes.py.
TEST(KeptModes, WedgeCutChunkCountsAndMeans) {
  const std::size_t N = 32, L = 48;
  const double cell = 3.0;
  const auto g = make_geometry(N, L, cell, 8.0);
  auto c = stats_config("[chunks]\nbandwidth_MHz = 3.0\n[scenarios.w]\narray = \"none\"\nwedge = true\n"
                        "wedge_buffer_per_mpc = 0.05\n[stats.power]\nbins = 12\nk_min_mpc = 0.0\nk_max_mpc = 1.2\n"
                        "log_bins = false\n[stats.cylindrical]\nkperp_bins = 6\nkperp_min_mpc = 0.0\n"
                        "kperp_max_mpc = 0.6\nkpar_bins = 5\nkpar_min_mpc = 0.0\nkpar_max_mpc = 1.0\nlog_bins = false\n");
  const auto sc = scenarios_from(c, toy_hubble, g);
  const auto kernels = stats::kernels_from(c);
  const auto& power = *kernels[0];
  const auto& cylindrical = *kernels[1];
  const auto units = chunk_units(c, g);
  std::mt19937 gen(11);
  std::normal_distribution<float> nd(0, 10);
  core::Array3<float> cone(N, N, L);
  for (auto& v : cone.data) v = nd(gen);
  sc[0].apply(cone, g, {1, 0, 0});
  int crossed = 0, empty = 0, untouched = 0;
  for (const auto& u : units) {
    const std::size_t len = u.los_end - u.los_begin, H = len / 2 + 1;
    const stats::Geometry sg{{N, N, len}, {cell, cell, cell}};
    const auto kept = sc[0].kept_modes(u, true, g);
    const auto clean_n = ints(power.axes(sg), "n_modes"), kept_n = ints(power.axes_kept(sg, kept), "n_modes");
    const auto chunk = extract_chunk(cone, u);
    const auto values = power.measure_kept(chunk.data.data(), sg, kept);
    const double mid = static_cast<double>(u.los_begin + len / 2);
    const auto k = static_cast<std::size_t>(mid);
    const double slope = wedge_slope(g.distance_mpc[k], toy_hubble(g.z[k]), g.z[k], 90.0);
    const auto F = fft3(chunk);
    const std::size_t nb = 12;
    std::vector<double> n_below(nb, 0), n_all(nb, 0), n_kept(nb, 0), sum(nb, 0);
    std::vector<double> c_below(30, 0), c_all(30, 0), c_kept(30, 0);  // cylindrical, k⊥-major 6 × 5
    for (std::size_t i = 0; i < N; ++i)
      for (std::size_t j = 0; j < N; ++j)
        for (long m = -static_cast<long>(len / 2); m < static_cast<long>((len + 1) / 2); ++m) {  // fftfreq values
          const double dk = 2 * std::numbers::pi / (static_cast<double>(N) * cell);
          const double kx = dk * static_cast<double>(core::fft_index(i, N)),
                       ky = dk * static_cast<double>(core::fft_index(j, N)),
                       kz = 2 * std::numbers::pi / (static_cast<double>(len) * cell) * static_cast<double>(m);
          const double kk = std::sqrt(kx * kx + ky * ky + kz * kz), kperp = std::hypot(kx, ky);
          if (kk == 0) continue;
          const bool cut = kperp == 0 || std::abs(kz) < slope * kperp + 0.05;
          if (kperp < 0.6 && std::abs(kz) < 1.0) {
            const auto cb = static_cast<std::size_t>(kperp / 0.1) * 5 + static_cast<std::size_t>(std::abs(kz) / 0.2);
            c_all[cb] += 1;
            (cut ? c_below : c_kept)[cb] += 1;
          }
          if (kk >= 1.2) continue;
          const auto b = static_cast<std::size_t>(kk / 0.1);
          n_all[b] += 1;
          if (kperp == 0 || std::abs(kz) < slope * kperp + 0.05) {
            n_below[b] += 1;
            continue;
          }
          n_kept[b] += 1;
          // the mirror of a negative-k∥ mode on the half grid: conj at (-i, -j, |m|)
          const std::size_t ii = m < 0 ? (N - i) % N : i, jj = m < 0 ? (N - j) % N : j;
          const auto f = F[(ii * N + jj) * H + static_cast<std::size_t>(std::abs(m))];
          sum[b] += std::norm(std::complex<double>(f)) * cell * cell * cell / static_cast<double>(N * N * len);
        }
    for (std::size_t b = 0; b < nb; ++b) {
      EXPECT_EQ(clean_n[b], static_cast<std::int64_t>(n_all[b])) << "bin " << b;
      EXPECT_EQ(kept_n[b], static_cast<std::int64_t>(n_kept[b])) << "bin " << b;
      if (n_below[b] > 0) EXPECT_LT(kept_n[b], clean_n[b]) << "bin " << b;
      else EXPECT_EQ(kept_n[b], clean_n[b]) << "bin " << b;
      if (n_kept[b] == 0) {
        EXPECT_TRUE(std::isnan(values[b])) << "bin " << b;
        ++empty;
      } else {
        EXPECT_NEAR(values[b], sum[b] / n_kept[b], 1e-5 * sum[b] / n_kept[b]) << "bin " << b;  // float spectrum
      }
    }
    // Cylindrical bins: k∥ ≥ m k⊥ + b keeps the upper left, the wedge empties the lower right.
    const auto cyl_clean = ints(cylindrical.axes(sg), "n_modes"), cyl_kept = ints(cylindrical.axes_kept(sg, kept), "n_modes");
    const auto cyl = cylindrical.measure_kept(chunk.data.data(), sg, kept);
    for (std::size_t b = 0; b < 30; ++b) {
      EXPECT_EQ(cyl_clean[b], static_cast<std::int64_t>(c_all[b])) << "cylindrical bin " << b;
      EXPECT_EQ(cyl_kept[b], static_cast<std::int64_t>(c_kept[b])) << "cylindrical bin " << b;
      if (c_below[b] > 0) {
        EXPECT_LT(cyl_kept[b], cyl_clean[b]) << "cylindrical bin " << b;
        ++crossed;
      } else {
        EXPECT_EQ(cyl_kept[b], cyl_clean[b]) << "cylindrical bin " << b;
        ++untouched;
      }
      EXPECT_EQ(std::isnan(cyl[b]), c_kept[b] == 0) << "cylindrical bin " << b;
    }
  }
  EXPECT_GT(crossed, 0);
  EXPECT_GT(empty, 0);  // bin 0 (|k| < 0.1) lies wholly inside this wedge
  EXPECT_GT(untouched, 0);
}

// Noise-bias-free power (common practice): on pure noise, the cross-power of the two
// independent noise realisations of one entry averages to zero within its sampling
// scatter, while the auto-power carries the noise power (whose value is checked against
// the radiometer equation in ThermalNoise.PowerSpectrumMatchesAnalytic).
TEST(KeptModes, CrossPowerOfPureNoiseIsZeroWithinScatter) {
  const std::size_t N = 32, L = 32;
  const auto g = make_geometry(N, L, 4.0, 8.0);
  auto c = stats_config("[scenarios.n]\nnoise = true\ncross_power = true\nstations = 40\nintegration_s = 300\n"
                        "[stats.power]\nbins = 6\nk_min_mpc = 0.05\nk_max_mpc = 0.6\n");
  const auto sc = scenarios_from(c, toy_hubble, g);
  ASSERT_TRUE(sc[0].settings().cross_power);
  const auto kernels = stats::kernels_from(c);
  const Unit whole{0, L, g.freq_MHz[L / 2], g.z[L / 2]};
  const auto kept = sc[0].kept_modes(whole, true, g);
  const stats::Geometry sg{{N, N, L}, {4.0, 4.0, 4.0}};
  const int R = 24;
  std::vector<double> cross(6, 0), cross2(6, 0), autop(6, 0);
  for (int r = 0; r < R; ++r) {
    core::Array3<float> a(N, N, L, 0.0f), b(N, N, L, 0.0f);
    sc[0].apply(a, g, {3, 0, static_cast<std::uint64_t>(r)});
    sc[0].apply(b, g, {3, 0, static_cast<std::uint64_t>(r)}, true);
    ASSERT_NE(a.data, b.data);
    const auto x = kernels[0]->measure_cross(a.data.data(), b.data.data(), sg, kept);
    const auto p = kernels[0]->measure_kept(a.data.data(), sg, kept);
    for (std::size_t k = 0; k < 6; ++k) {
      cross[k] += x[k] / R;
      cross2[k] += x[k] * x[k] / R;
      autop[k] += p[k] / R;
    }
  }
  int bins = 0;
  for (std::size_t k = 0; k < 6; ++k) {
    if (std::isnan(autop[k])) continue;
    ++bins;
    const double sigma_mean = std::sqrt((cross2[k] - cross[k] * cross[k]) / (R - 1));
    EXPECT_LT(std::abs(cross[k]), 4.0 * sigma_mean) << "bin " << k;  // 4σ: sampling scatter of the mean
    EXPECT_LT(std::abs(cross[k]), 0.1 * autop[k]) << "bin " << k;    // and far below the noise bias
  }
  EXPECT_GE(bins, 3);
}

// The clean path is untouched: an all-kept description gives measure() byte for byte.
TEST(KeptModes, CleanDescriptionIsByteIdentical) {
  auto c = stats_config("[stats.power]\n[stats.cylindrical]\n[stats.bispectrum]\nk1_mpc = [0.4]\nk2_mpc = [0.4]\n"
                        "angle_deg = [120.0]\n");
  std::mt19937 gen(2);
  std::normal_distribution<float> nd(0, 1);
  std::vector<float> x(16 * 16 * 24);
  for (auto& v : x) v = nd(gen);
  const stats::Geometry sg{{16, 16, 24}, {2.0, 2.0, 2.0}};
  for (const auto& k : stats::kernels_from(c)) {
    const auto a = k->measure(x.data(), sg), b = k->measure_kept(x.data(), sg, stats::KeptModes{});
    ASSERT_EQ(a.size(), b.size());
    for (std::size_t i = 0; i < a.size(); ++i)
      EXPECT_TRUE(std::memcmp(&a[i], &b[i], sizeof(double)) == 0) << k->name() << " coefficient " << i;
  }
}
