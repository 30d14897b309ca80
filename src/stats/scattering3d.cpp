// Cylindrical wavelet scattering of chunks (DESIGN.md §6, [stats.scattering3d], contract).
//
// The filters are separable into a transverse part R_j(q) and a line-of-sight part Z_m(p), and
// R_j is real and radial, so v_j = x ⋆ R_j is a real field. Each convolution therefore runs as
//   1. one transverse 2D inverse per line-of-sight frequency plane of the half spectrum (shared by
//      every m at this j), giving v̂_j(x1, x2, k3) for k3 ≥ 0 (k3 < 0 by Hermitian symmetry);
//   2. per m, one batch of 1D inverses along the line of sight of v̂_j · Z_m,
// which is the full-resolution definition rearranged (crop = false), with no full 3D inverse per filter. With `crop`, each step keeps only the Fourier box where |filter| exceeds
// 1e-6 of its peak and inverts on a smaller grid (the line-of-sight box shifted to its centre, which
// only changes the phase), oversampled so that means over the coarse samples match the full-grid
// means within the contract's tolerance (tests/stats/check_scattering3d.py).
#include <algorithm>
#include <cmath>

#include "fft/fft.hpp"
#include "stats/internal.hpp"

namespace spinflip::stats::detail {
namespace {

using cf = fft::cfloat;

struct Params {
  std::size_t J, M;
  double xi0, eta0, rho;
  bool normalise, crop;
};

long signed_index(std::size_t i, std::size_t n) {
  return i < (n + 1) / 2 ? static_cast<long>(i) : static_cast<long>(i) - static_cast<long>(n);
}
std::size_t wrap(long m, std::size_t n) {
  const long nn = static_cast<long>(n);
  return static_cast<std::size_t>(((m % nn) + nn) % nn);
}

/// One-sided band-pass of DESIGN §6: exp(-(u-c)²/2w²) - exp(-(u²+c²)/2w²); zero at u = 0.
double band(double u, double c, double w) {
  return std::exp(-(u - c) * (u - c) / (2 * w * w)) - std::exp(-(u * u + c * c) / (2 * w * w));
}

/// Smallest 2^a 3^b ≥ x (sizes FFTW transforms fast), or n when that is not smaller than n.
std::size_t grid_size(std::size_t x, std::size_t n) {
  std::size_t best = n;
  for (std::size_t p2 = 1; p2 < 2 * n; p2 *= 2)
    for (std::size_t g = p2; g < 2 * n; g *= 3)
      if (g >= x && g < best) best = g;
  return best;
}

// Cropping rule (tuned against the numpy reference, tests/stats/check_scattering3d.py): the box holds
// |filter| > 1e-6 of its peak; the grid of |x⋆ψ| holds `oversample` times the width where |filter| >
// 1e-3 of its peak, and at least `min_grid` cells. |x⋆ψ| is not band-limited (cusps where x⋆ψ
// vanishes), so its mean over coarse samples needs that margin: 2.5× put one coefficient of white
// noise on 48 × 48 × 64 at 1.4× the contract's tolerance, 2× used 0.7 of it on 128 × 128 × 64.
constexpr double box_level = 1e-6, band_level = 1e-3, oversample = 3.0;
constexpr std::size_t min_grid = 16;

/// The transverse filter R_j on a chunk's (n1, n2) grid: box [-h_a, h_a] per axis, or the full
/// axis when `full[a]`, values over the box (fine-grid frequencies), and its grid for |x⋆ψ|.
struct Transverse {
  std::array<bool, 2> full{};
  std::array<long, 2> h{};            // box half-widths (full axes: unused)
  std::array<std::size_t, 2> w{};     // box widths (full axes: n)
  std::array<std::size_t, 2> mean{};  // grid of |x⋆ψ|
  std::vector<float> value;           // w[0] × w[1], box row r = signed index r - h (full: fftfreq order)
  long index(int axis, std::size_t r) const {
    return full[axis] ? signed_index(r, w[axis]) : static_cast<long>(r) - h[axis];
  }
};

/// The line-of-sight filter Z_m on n3: signed box [lo, hi] (full: every index), shift c, grid.
struct Los {
  bool full = false;
  long lo = 0, hi = 0, c = 0;
  std::size_t mean = 0;
  std::vector<float> value;  // hi - lo + 1 values, index s - lo
};

struct Bank {
  std::size_t n1, n2, n3;
  std::vector<Transverse> t;            // per j
  std::vector<Los> z;                   // per m
  std::vector<std::array<std::size_t, 2>> t_u;  // per j1: transverse grid of U1 (holds every j2 ≥ j1 box)
  std::vector<std::size_t> z_u;         // per m1: line-of-sight grid of U1
};

/// Flagged signed indices of a 1D table in fftfreq order → [lo, hi], or full.
std::pair<long, long> flagged_range(const std::vector<double>& v, std::size_t n, double level) {
  double peak = 0;
  for (double x : v) peak = std::max(peak, std::abs(x));
  long lo = 0, hi = 0;
  for (std::size_t i = 0; i < n; ++i)
    if (std::abs(v[i]) > level * peak) {
      lo = std::min(lo, signed_index(i, n));
      hi = std::max(hi, signed_index(i, n));
    }
  return {lo, hi};
}

Bank build_bank(const Params& p, std::size_t n1, std::size_t n2, std::size_t n3) {
  Bank b{n1, n2, n3, {}, {}, {}, {}};
  const std::array<std::size_t, 2> nt{n1, n2};
  for (std::size_t j = 0; j < p.J; ++j) {
    const double xi = p.xi0 * std::pow(2.0, -static_cast<double>(j)), sigma = p.rho * xi;
    auto R = [&](long s1, long s2) {
      const double k1 = 2 * M_PI * static_cast<double>(s1) / static_cast<double>(n1);
      const double k2 = 2 * M_PI * static_cast<double>(s2) / static_cast<double>(n2);
      return band(std::sqrt(k1 * k1 + k2 * k2), xi, sigma);
    };
    Transverse t;
    for (int a = 0; a < 2; ++a) {
      // R is radial and ≥ 0, so index s of axis a is in the box when some q ≥ |k_a(s)| on its row passes:
      // the row's largest value is R at max(|k_a|, argmax) along the other axis at 0 (or the peak).
      std::vector<double> row_max(nt[a]), row_band(nt[a]);
      for (std::size_t i = 0; i < nt[a]; ++i) {
        double m = 0;
        for (std::size_t k = 0; k < nt[1 - a]; ++k) {
          const long s = signed_index(i, nt[a]), u = signed_index(k, nt[1 - a]);
          m = std::max(m, a == 0 ? R(s, u) : R(u, s));
        }
        row_max[i] = m;
      }
      const auto box = flagged_range(row_max, nt[a], box_level);
      const auto bnd = flagged_range(row_max, nt[a], band_level);
      const long h = std::max(-box.first, box.second);
      const long hb = std::max(-bnd.first, bnd.second);
      t.full[a] = !p.crop || 2 * h + 1 >= static_cast<long>(nt[a]);
      t.h[a] = h;
      t.w[a] = t.full[a] ? nt[a] : static_cast<std::size_t>(2 * h + 1);
      t.mean[a] = t.full[a] ? nt[a]
                            : grid_size(std::max({t.w[a], static_cast<std::size_t>(oversample * static_cast<double>(2 * hb + 1)),
                                                  min_grid}),
                                        nt[a]);
      if (t.mean[a] == nt[a]) t.full[a] = true, t.w[a] = nt[a];  // a full grid gains nothing from a box
    }
    t.value.resize(t.w[0] * t.w[1]);
    for (std::size_t r = 0; r < t.w[0]; ++r)
      for (std::size_t c = 0; c < t.w[1]; ++c)
        t.value[r * t.w[1] + c] = static_cast<float>(R(t.index(0, r), t.index(1, c)));
    b.t.push_back(std::move(t));
  }
  for (std::size_t m = 0; m < p.M; ++m) {
    const double eta = p.eta0 * std::pow(2.0, -static_cast<double>(m)), tau = p.rho * eta;
    std::vector<double> v(n3);
    for (std::size_t i = 0; i < n3; ++i)
      v[i] = band(2 * M_PI * static_cast<double>(signed_index(i, n3)) / static_cast<double>(n3), eta, tau);
    Los z;
    const auto box = flagged_range(v, n3, box_level), bnd = flagged_range(v, n3, band_level);
    const std::size_t w = static_cast<std::size_t>(box.second - box.first + 1);
    z.full = !p.crop || w >= n3;
    z.mean = z.full ? n3
                    : grid_size(std::max({w, static_cast<std::size_t>(oversample * static_cast<double>(bnd.second - bnd.first + 1)),
                                          min_grid}),
                                n3);
    if (z.mean == n3) z.full = true;
    z.lo = z.full ? -static_cast<long>(n3 / 2) : box.first;
    z.hi = z.full ? static_cast<long>((n3 - 1) / 2) : box.second;
    z.c = z.full ? 0 : z.lo + static_cast<long>(w / 2);
    for (long s = z.lo; s <= z.hi; ++s) z.value.push_back(static_cast<float>(v[wrap(s, n3)]));
    b.z.push_back(std::move(z));
  }
  // U1 grids: its own mean grid, and large enough that every box it feeds (j2 ≥ j1, m2 ≥ m1) lies
  // inside its fftfreq range [-(u/2), (u-1)/2].
  for (std::size_t j = 0; j < p.J; ++j) {
    std::array<std::size_t, 2> u = b.t[j].mean;
    for (std::size_t j2 = j; j2 < p.J; ++j2)
      for (int a = 0; a < 2; ++a)
        if (b.t[j2].full[a]) u[a] = nt[a];
        else u[a] = std::max(u[a], static_cast<std::size_t>(2 * b.t[j2].h[a] + 2));
    for (int a = 0; a < 2; ++a) u[a] = u[a] >= nt[a] ? nt[a] : grid_size(u[a], nt[a]);
    b.t_u.push_back(u);
  }
  for (std::size_t m = 0; m < p.M; ++m) {
    std::size_t u = b.z[m].mean;
    for (std::size_t m2 = m; m2 < p.M; ++m2)
      u = b.z[m2].full ? n3 : std::max({u, static_cast<std::size_t>(2 * b.z[m2].hi + 2),
                                        static_cast<std::size_t>(-2 * b.z[m2].lo + 1)});
    b.z_u.push_back(u >= n3 ? n3 : grid_size(u, n3));
  }
  return b;
}

/// Half spectrum (last axis = line of sight, p3/2+1 planes) of a real p1 × p2 × p3 field.
struct Spectrum {
  std::array<std::size_t, 3> p{};
  fft::Buffer<cf> data;
  std::size_t h3() const { return p[2] / 2 + 1; }
};

template <class T>
void fit(fft::Buffer<T>& b, std::size_t n) {
  if (b.size() < n) b = fft::Buffer<T>(n);
}

struct Scratch {
  fft::Buffer<cf> w, w2, f;  // transverse stage [a][b][k3] (first, second order), line-of-sight stage [a][b][z]
  fft::Buffer<float> u1;
  Spectrum x, ux;
};

void forward(const float* real, const std::array<std::size_t, 3>& p, Spectrum& s) {
  s.p = p;
  fit(s.data, p[0] * p[1] * s.h3());
  fft::r2c_3d(p, real, s.data.data());
}

/// Stage 1: v̂(x1, x2, k3) = Σ_{k1,k2} S(k) R(k1, k2) e^{+i(k1x1+k2x2)} on a g1 × g2 grid for the
/// first `planes` non-negative k3, into w laid out [a][b][k3] (planes contiguous).
void transverse(const Spectrum& s, const Transverse& t, std::size_t g1, std::size_t g2, std::size_t planes,
                fft::Buffer<cf>& w) {
  const std::size_t H = s.h3(), n = g1 * g2 * planes;
  fit(w, n);
  cf* W = w.data();
  std::fill(W, W + n, cf(0, 0));
  std::vector<char> row_used(g1, 0);
  for (std::size_t r = 0; r < t.w[0]; ++r) {
    const long s1 = t.index(0, r);
    const std::size_t src1 = wrap(s1, s.p[0]), dst1 = wrap(s1, g1);
    row_used[dst1] = 1;
    for (std::size_t c = 0; c < t.w[1]; ++c) {
      const long s2 = t.index(1, c);
      const float v = t.value[r * t.w[1] + c];
      const cf* src = s.data.data() + (src1 * s.p[1] + wrap(s2, s.p[1])) * H;
      cf* dst = W + (dst1 * g2 + wrap(s2, g2)) * planes;
      for (std::size_t k = 0; k < planes; ++k) dst[k] = src[k] * v;
    }
  }
  for (std::size_t a = 0; a < g1; ++a)  // along axis 1, rows the box touches only
    if (row_used[a])
      fft::c2c_1d_batch(g2, planes, W + a * g2 * planes, planes, 1, W + a * g2 * planes, planes, 1,
                        fft::Direction::inverse);
  fft::c2c_1d_batch(g1, g2 * planes, W, g2 * planes, 1, W, g2 * planes, 1, fft::Direction::inverse);
}

/// Σ |f| over n complex values, and with `store` also store[i] = scale |f_i|. Eight float partial
/// sums keep the loop vectorised (sqrtf with -fno-math-errno, see CMakeLists.txt).
template <bool Store>
[[gnu::always_inline]] inline double modulus_sum(const cf* f, std::size_t n, float scale, float* store) {
  constexpr std::size_t lanes = 8;
  const float* w = reinterpret_cast<const float*>(f);
  float acc[lanes] = {};
  std::size_t k = 0;
  for (; k + lanes <= n; k += lanes)
    for (std::size_t t = 0; t < lanes; ++t) {
      const float re = w[2 * (k + t)], im = w[2 * (k + t) + 1];
      const float v = std::sqrt(re * re + im * im);
      acc[t] += v;
      if constexpr (Store) store[k + t] = v * scale;
    }
  double total = 0;
  for (; k < n; ++k) {
    const float v = std::sqrt(w[2 * k] * w[2 * k] + w[2 * k + 1] * w[2 * k + 1]);
    total += static_cast<double>(v);
    if constexpr (Store) store[k] = v * scale;
  }
  for (std::size_t t = 0; t < lanes; ++t) total += static_cast<double>(acc[t]);
  return total;
}

// Compiled for AVX2 and the baseline, picked at load time (as in scattering.cpp).
#if defined(__x86_64__) && defined(__GNUC__) && !defined(__clang__)
#define SPINFLIP_SIMD_CLONES [[gnu::target_clones("avx2", "default")]]
#else
#define SPINFLIP_SIMD_CLONES
#endif
SPINFLIP_SIMD_CLONES double modulus_only(const cf* f, std::size_t n) { return modulus_sum<false>(f, n, 0.0f, nullptr); }
SPINFLIP_SIMD_CLONES double modulus_store(const cf* f, std::size_t n, float scale, float* store) {
  return modulus_sum<true>(f, n, scale, store);
}

/// Stage 2: mean over the g1 × g2 × g3 grid of |x⋆ψ| (scaled to the fine-grid definition), from the
/// transverse stage's planes; with `store`, also the samples |x⋆ψ| (g1 × g2 × g3, C order). Lines run
/// in blocks that stay in cache from the filter product through the transform to the modulus.
double line_of_sight(const cf* W, std::size_t g1, std::size_t g2, std::size_t planes, const Los& z, std::size_t g3,
                     double scale, fft::Buffer<cf>& fbuf, float* store) {
  const std::size_t lines = g1 * g2, block = std::max<std::size_t>(1, 16384 / g3);
  fit(fbuf, block * g3);
  cf* F = fbuf.data();
  const float sc = static_cast<float>(scale);
  // The box [lo, hi] lands at (s - c) mod g3: at most two runs on each side of s = 0, so the
  // per-line loops below are plain (no division); the cells outside the box are zeroed once per line.
  struct Run {
    long s;
    std::size_t d, len;
  };
  std::vector<Run> runs;
  auto add_runs = [&](long a, long b) {  // s in [a, b]
    while (a <= b) {
      const std::size_t d = wrap(a - z.c, g3), len = std::min<std::size_t>(static_cast<std::size_t>(b - a + 1), g3 - d);
      runs.push_back({a, d, len});
      a += static_cast<long>(len);
    }
  };
  add_runs(z.lo, std::min(z.hi, -1L));
  const std::size_t n_negative = runs.size();
  add_runs(std::max(z.lo, 0L), z.hi);
  const std::size_t width = static_cast<std::size_t>(z.hi - z.lo + 1);
  const std::size_t gap_start = wrap(z.hi + 1 - z.c, g3), gap = g3 - width;  // cells never written
  double total = 0;
  for (std::size_t l0 = 0; l0 < lines; l0 += block) {
    const std::size_t nb = std::min(block, lines - l0);
    for (std::size_t l = 0; l < nb; ++l) {
      const cf* w = W + (l0 + l) * planes;
      cf* f = F + l * g3;
      for (std::size_t t = 0; t < gap; ++t) f[(gap_start + t) % g3] = cf(0, 0);
      for (std::size_t r = 0; r < runs.size(); ++r) {
        const Run& run = runs[r];
        const float* v = z.value.data() + (run.s - z.lo);
        cf* dst = f + run.d;
        if (r < n_negative) {  // the transverse stage's field is real: w(-k3) = conj w(k3)
          const cf* src = w - run.s;
          for (std::size_t t = 0; t < run.len; ++t) dst[t] = std::conj(*(src - t)) * v[t];
        } else {
          const cf* src = w + run.s;
          for (std::size_t t = 0; t < run.len; ++t) dst[t] = src[t] * v[t];
        }
      }
    }
    fft::c2c_1d_batch(g3, nb, F, 1, g3, F, 1, g3, fft::Direction::inverse);
    total += store ? modulus_store(F, nb * g3, sc, store + l0 * g3) : modulus_only(F, nb * g3);
  }
  return total * scale / static_cast<double>(lines * g3);
}

/// Largest |k3| index any of these line-of-sight filters reads, as a plane count.
std::size_t planes_for(const Bank& b, std::size_t m_from, std::size_t M, std::size_t h3) {
  long top = 0;
  for (std::size_t m = m_from; m < M; ++m) top = std::max({top, b.z[m].hi, -b.z[m].lo});
  return std::min(h3, static_cast<std::size_t>(top) + 1);
}

struct ShapeKey {
  std::size_t n1, n2, n3;
  bool operator==(const ShapeKey&) const = default;
};

class Scattering3dKernel final : public Kernel {
 public:
  explicit Scattering3dKernel(Params p) : p_(p) {}
  const std::string& name() const override { return name_; }
  UnitKind unit_kind() const override { return UnitKind::chunk; }

  void check(const Geometry& g) const override {
    require_dims(name_, g, UnitKind::chunk);
    // The coarsest filter's centre wavelength must fit in the chunk: 2π/ξ_{J-1} ≤ min(N1, N2) cells
    // across, 2π/η_{M-1} ≤ N3 along the line of sight.
    const double xi = p_.xi0 * std::pow(2.0, 1.0 - static_cast<double>(p_.J));
    const double eta = p_.eta0 * std::pow(2.0, 1.0 - static_cast<double>(p_.M));
    const double across = 2 * M_PI / xi, along = 2 * M_PI / eta;
    auto text = [](double v) { return std::to_string(static_cast<long>(std::ceil(v - 1e-9))); };
    if (across > static_cast<double>(std::min(g.shape[0], g.shape[1])))
      throw InputError("stats.scattering3d.transverse_scales = " + std::to_string(p_.J) +
                       ": the coarsest transverse filter (wavelength 2π/ξ_J-1 = " + text(across) +
                       " cells) does not fit a chunk of shape " + shape_text(g.shape) +
                       "; use fewer scales or a wider chunk");
    if (along > static_cast<double>(g.shape[2]))
      throw InputError("stats.scattering3d.los_scales = " + std::to_string(p_.M) +
                       ": the coarsest line-of-sight filter (wavelength 2π/η_M-1 = " + text(along) +
                       " cells) does not fit a chunk of shape " + shape_text(g.shape) +
                       "; use fewer scales or a longer chunk");
  }

  std::size_t n_coeff(const Geometry&) const override { return 1 + p_.J * p_.M + n_second(); }

  std::vector<Axis> axes(const Geometry&) const override {
    std::vector<std::int64_t> order{0}, j1{-1}, m1{-1}, j2{-1}, m2{-1};
    const auto J = static_cast<std::int64_t>(p_.J), M = static_cast<std::int64_t>(p_.M);
    for (std::int64_t j = 0; j < J; ++j)
      for (std::int64_t m = 0; m < M; ++m) order.push_back(1), j1.push_back(j), m1.push_back(m), j2.push_back(-1), m2.push_back(-1);
    for (std::int64_t a = 0; a < J; ++a)
      for (std::int64_t b = 0; b < M; ++b)
        for (std::int64_t c = a; c < J; ++c)
          for (std::int64_t d = b; d < M; ++d)
            if (c != a || d != b) order.push_back(2), j1.push_back(a), m1.push_back(b), j2.push_back(c), m2.push_back(d);
    return {{"order", order}, {"j1", j1}, {"m1", m1}, {"j2", j2}, {"m2", m2}};
  }

  std::vector<double> measure(const float* data, const Geometry& g) const override {
    check(g);
    const std::size_t n1 = g.shape[0], n2 = g.shape[1], n3 = g.shape[2], J = p_.J, M = p_.M;
    auto bank = cache_.get(ShapeKey{n1, n2, n3}, [&] { return build_bank(p_, n1, n2, n3); });
    thread_local Scratch sc;
    fft::Buffer<float> copy;
    forward(aligned(data, n1 * n2 * n3, copy), {n1, n2, n3}, sc.x);

    double s0 = 0;
    for (std::size_t i = 0; i < n1 * n2 * n3; ++i) s0 += data[i];
    std::vector<double> out{s0 / static_cast<double>(n1 * n2 * n3)};
    std::vector<double> s1(J * M);
    std::vector<double> s2;  // in output order
    s2.reserve(n_second());
    for (std::size_t ja = 0; ja < J; ++ja) {
      const auto [t1, t2] = bank->t_u[ja];
      const std::size_t planes = planes_for(*bank, 0, M, sc.x.h3());
      transverse(sc.x, bank->t[ja], t1, t2, planes, sc.w);
      for (std::size_t ma = 0; ma < M; ++ma) {
        const bool feeds = ja + 1 < J || ma + 1 < M;
        const std::size_t u3 = bank->z_u[ma];
        fit(sc.u1, t1 * t2 * u3);
        s1[ja * M + ma] = line_of_sight(sc.w.data(), t1, t2, planes, bank->z[ma], u3,
                                        1.0 / static_cast<double>(n1 * n2 * n3), sc.f, feeds ? sc.u1.data() : nullptr);
        if (!feeds) continue;
        forward(sc.u1.data(), {t1, t2, u3}, sc.ux);
        const double scale = 1.0 / static_cast<double>(t1 * t2 * u3);
        for (std::size_t jb = ja; jb < J; ++jb) {
          const auto& tb = bank->t[jb];
          const std::size_t b1 = tb.full[0] ? n1 : tb.mean[0], b2 = tb.full[1] ? n2 : tb.mean[1];
          const std::size_t pl = planes_for(*bank, ma, M, sc.ux.h3());
          transverse(sc.ux, tb, b1, b2, pl, sc.w2);
          for (std::size_t mb = ma; mb < M; ++mb) {
            if (jb == ja && mb == ma) continue;
            const auto& zb = bank->z[mb];
            s2.push_back(line_of_sight(sc.w2.data(), b1, b2, pl, zb, zb.full ? n3 : zb.mean, scale, sc.f, nullptr));
          }
        }
      }
    }
    out.insert(out.end(), s1.begin(), s1.end());
    // s2 was filled in the order j1, m1, j2, m2 (the loops above), which is the output order.
    if (p_.normalise) {
      std::size_t i = 0;
      for (std::size_t a = 0; a < J; ++a)
        for (std::size_t b = 0; b < M; ++b)
          for (std::size_t c = a; c < J; ++c)
            for (std::size_t d = b; d < M; ++d)
              if (c != a || d != b) {
                const double den = s1[a * M + b];
                s2[i] = den > 0 ? s2[i] / den : std::nan("");
                ++i;
              }
    }
    out.insert(out.end(), s2.begin(), s2.end());
    return out;
  }

  Attributes attributes() const override {
    return {{"kernel", std::string("cylindrical wavelet scattering")},
            {"transverse_scales", static_cast<std::int64_t>(p_.J)},
            {"los_scales", static_cast<std::int64_t>(p_.M)},
            {"xi0", p_.xi0},
            {"eta0", p_.eta0},
            {"bandwidth", p_.rho},
            {"normalise", std::int64_t{p_.normalise ? 1 : 0}},
            {"crop", p_.crop}};
  }

 private:
  std::size_t n_second() const {
    std::size_t n = 0;
    for (std::size_t a = 0; a < p_.J; ++a)
      for (std::size_t b = 0; b < p_.M; ++b) n += (p_.J - a) * (p_.M - b) - 1;
    return n;
  }
  std::string name_ = "scattering3d";
  Params p_;
  TableCache<ShapeKey, Bank> cache_;
};

}  // namespace

void declare_scattering3d(core::Schema& s) {
  using core::ValueType;
  const std::string t = "stats.scattering3d";
  s.add_table(t, "Cylindrical wavelet scattering S0, S1, S2 of 3D chunks: filters R_j(k_perp) Z_m(k_par) (DESIGN.md §6).");
  s.add({.path = t + ".transverse_scales", .type = ValueType::integer, .default_value = std::int64_t{4}, .min = 1,
         .max = 16, .doc = "number J of dyadic transverse scales (wavelength 2π/ξ_J-1 must fit across the chunk)"});
  s.add({.path = t + ".los_scales", .type = ValueType::integer, .default_value = std::int64_t{3}, .min = 1, .max = 16,
         .doc = "number M of dyadic line-of-sight scales (wavelength 2π/η_M-1 must fit along the chunk)"});
  s.add({.path = t + ".xi0", .type = ValueType::real, .default_value = 3.0 * M_PI / 4.0, .unit = "rad/cell",
         .min = 0.0, .max = M_PI, .min_exclusive = true, .doc = "transverse centre of scale 0 (ξ_j = xi0 2^-j)"});
  s.add({.path = t + ".eta0", .type = ValueType::real, .default_value = 3.0 * M_PI / 4.0, .unit = "rad/cell",
         .min = 0.0, .max = M_PI, .min_exclusive = true, .doc = "line-of-sight centre of scale 0 (η_m = eta0 2^-m)"});
  s.add({.path = t + ".bandwidth", .type = ValueType::real, .default_value = 0.5, .min = 0.0, .max = 2.0,
         .min_exclusive = true, .doc = "relative width ρ of every filter (σ_j = ρ ξ_j, τ_m = ρ η_m)"});
  s.add({.path = t + ".normalise", .type = ValueType::boolean, .default_value = false,
         .doc = "divide S2(j1,m1,j2,m2) by S1(j1,m1)"});
  s.add({.path = t + ".crop", .type = ValueType::boolean, .default_value = true,
         .doc = "invert on Fourier grids cropped to each filter's support (same result within 1e-4); false: full grid"});
}

std::unique_ptr<Kernel> make_scattering3d(const core::Config& c) {
  const std::string t = "stats.scattering3d";
  Params p;
  p.J = static_cast<std::size_t>(c.integer(t + ".transverse_scales"));
  p.M = static_cast<std::size_t>(c.integer(t + ".los_scales"));
  p.xi0 = c.real(t + ".xi0");
  p.eta0 = c.real(t + ".eta0");
  p.rho = c.real(t + ".bandwidth");
  p.normalise = c.boolean(t + ".normalise");
  p.crop = c.boolean(t + ".crop");
  return std::make_unique<Scattering3dKernel>(p);
}

}  // namespace spinflip::stats::detail
