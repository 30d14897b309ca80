// 2D wavelet scattering (DESIGN.md §6, exact definition there). Filters are
// built once per slice shape. With `crop`, each convolution keeps only the
// Fourier box where |ψ̂| > 1e-7 max|ψ̂| (shifted to the box centre, which only
// changes the phase) and is inverted on a smaller power-of-two grid, oversampled
// so that means over the coarse samples match the full-grid means to the
// contract's tolerance (checked against numpy in tests/stats/check_scattering.py).
// Inverse transforms run on rows padded past a power of two (cache sets) and, when
// the box leaves rows or columns of the grid empty, in two 1D passes that skip them.
#include <algorithm>
#include <cmath>
#include <numeric>

#include "fft/fft.hpp"
#include "stats/internal.hpp"

namespace spinflip::stats::detail {
namespace {

using cf = fft::cfloat;

struct ScatteringParams {
  std::size_t J, L;
  double xi0, sigma0, slant;
  bool rotation, normalise, crop;
};

/// One filter ψ̂_{j,l} restricted to a box of fine-grid frequency indices
/// [b1, b1+w1) × [b2, b2+w2) (signed, taken modulo N), inverted on m1 × m2
/// after shifting the box centre (c1, c2) to zero.
struct Filter {
  long b1 = 0, b2 = 0, c1 = 0, c2 = 0;
  std::size_t w1 = 0, w2 = 0;
  std::size_t m1 = 0, m2 = 0;    // grid for |x⋆ψ| when only its mean is needed
  std::size_t u1 = 0, u2 = 0;    // grid for U1 = |x⋆ψ| that feeds second order
  std::vector<float> value;      // w1 × w2
};

struct Bank {
  std::size_t n1, n2;
  std::vector<Filter> filters;  // index j * L + l
};

long wrap(long m, std::size_t n) {
  const long nn = static_cast<long>(n);
  return ((m % nn) + nn) % nn;
}
long signed_index(std::size_t i, std::size_t n) {
  return i < (n + 1) / 2 ? static_cast<long>(i) : static_cast<long>(i) - static_cast<long>(n);
}

/// Smallest power of two ≥ x, or n when that is not smaller than n. (With FFTW_ESTIMATE plans
/// 96² and 192² padded-row transforms ran no faster than 128² and 256², measured.)
std::size_t grid_size(std::size_t x, std::size_t n) {
  std::size_t g = 1;
  while (g < x) g *= 2;
  return g < n ? g : n;
}

/// Smallest circular arc [start, start+len) of 0..n-1 covering every flagged index.
std::pair<long, std::size_t> covering_arc(const std::vector<char>& flag) {
  const std::size_t n = flag.size();
  std::vector<std::size_t> on;
  for (std::size_t i = 0; i < n; ++i)
    if (flag[i]) on.push_back(i);
  if (on.empty()) return {0, 1};
  std::size_t gap = 0, after = on.front();  // largest run of unflagged cells, and where it ends
  for (std::size_t a = 0; a < on.size(); ++a) {
    const std::size_t next = a + 1 < on.size() ? on[a + 1] : on.front() + n;
    if (next - on[a] - 1 > gap) {
      gap = next - on[a] - 1;
      after = next % n;
    }
  }
  if (gap == 0) return {0, n};
  return {signed_index(after, n), n - gap};
}

Bank build_bank(const ScatteringParams& p, std::size_t n1, std::size_t n2) {
  Bank bank{n1, n2, {}};
  const double two_pi = 2.0 * M_PI;
  for (std::size_t j = 0; j < p.J; ++j) {
    const double xi = p.xi0 * std::pow(2.0, -static_cast<double>(j));
    const double sigma = p.sigma0 * std::pow(2.0, static_cast<double>(j));
    for (std::size_t l = 0; l < p.L; ++l) {
      const double th = M_PI * static_cast<double>(l) / static_cast<double>(p.L);
      const double ct = std::cos(th), st = std::sin(th);
      // g(a, b) = exp(-σ²(a² + b²/s²)/2), summed over the 3×3 periodic images.
      auto periodised = [&](double k1, double k2, double shift) {
        double sum = 0.0;
        for (int a = -1; a <= 1; ++a)
          for (int b = -1; b <= 1; ++b) {
            const double q1 = k1 + two_pi * a, q2 = k2 + two_pi * b;
            const double kpar = q1 * ct + q2 * st - shift, kperp = -q1 * st + q2 * ct;
            sum += std::exp(-0.5 * sigma * sigma * (kpar * kpar + kperp * kperp / (p.slant * p.slant)));
          }
        return sum;
      };
      const double beta = periodised(0, 0, xi) / periodised(0, 0, 0);
      std::vector<double> full(n1 * n2);
      double peak = 0.0;
      for (std::size_t i = 0; i < n1; ++i)
        for (std::size_t k = 0; k < n2; ++k) {
          const double k1 = two_pi * static_cast<double>(signed_index(i, n1)) / static_cast<double>(n1);
          const double k2 = two_pi * static_cast<double>(signed_index(k, n2)) / static_cast<double>(n2);
          const double v = periodised(k1, k2, xi) - beta * periodised(k1, k2, 0);
          full[i * n2 + k] = v;
          peak = std::max(peak, std::abs(v));
        }
      Filter f;
      // A wavelet wider than a quarter of the slice is not cropped: on such slices the coarse
      // means of the largest scale missed the tolerance (80 × 200 with J = 6, in tests).
      const bool wide = sigma > 0.25 * static_cast<double>(std::min(n1, n2));
      if (!p.crop || wide) {
        f.w1 = f.m1 = f.u1 = n1;
        f.w2 = f.m2 = f.u2 = n2;
      } else {
        // Box kept in the product, and the (narrower) band whose double must fit the grid of |x⋆ψ|².
        auto arc = [&](double level, int axis) {
          std::vector<char> flag(axis == 0 ? n1 : n2, 0);
          for (std::size_t i = 0; i < n1; ++i)
            for (std::size_t k = 0; k < n2; ++k)
              if (std::abs(full[i * n2 + k]) > level * peak) flag[axis == 0 ? i : k] = 1;
          return covering_arc(flag);
        };
        const auto a1 = arc(1e-7, 0), a2 = arc(1e-7, 1);
        // |x⋆ψ| is not band-limited (it has cusps where x⋆ψ vanishes), so a mean over coarse samples
        // converges slowly: 4× the 1e-3 band of ψ̂ and at least 64 samples per axis keep every
        // coefficient within the contract's 1e-4 (tests/stats/check_scattering.py; 2× gave 2e-3).
        constexpr double band = 1e-3, fac = 4.0;
        constexpr std::size_t minsz = 64;
        const auto e1 = arc(band, 0), e2 = arc(band, 1);
        f.b1 = a1.first;
        f.w1 = a1.second;
        f.b2 = a2.first;
        f.w2 = a2.second;
        f.c1 = f.w1 == n1 ? 0 : f.b1 + static_cast<long>(f.w1 / 2);
        f.c2 = f.w2 == n2 ? 0 : f.b2 + static_cast<long>(f.w2 / 2);
        f.m1 = f.w1 == n1 ? n1 : grid_size(std::max({f.w1, static_cast<std::size_t>(fac * static_cast<double>(e1.second)) + 1, minsz}), n1);
        f.m2 = f.w2 == n2 ? n2 : grid_size(std::max({f.w2, static_cast<std::size_t>(fac * static_cast<double>(e2.second)) + 1, minsz}), n2);
        // On a full axis the box still tells the two-pass inverse which rows/columns are empty.
      }
      f.value.resize(f.w1 * f.w2);
      for (std::size_t i = 0; i < f.w1; ++i)
        for (std::size_t k = 0; k < f.w2; ++k)
          f.value[i * f.w2 + k] = static_cast<float>(
              full[wrap(f.b1 + static_cast<long>(i), n1) * n2 + wrap(f.b2 + static_cast<long>(k), n2)]);
      bank.filters.push_back(std::move(f));
    }
  }
  // A U1 grid must also hold every finer-j2 box it feeds, in its own fftfreq range.
  for (std::size_t j = 0; j < p.J; ++j)
    for (std::size_t l = 0; l < p.L; ++l) {
      Filter& f = bank.filters[j * p.L + l];
      std::size_t need1 = f.m1, need2 = f.m2;
      for (std::size_t j2 = j + 1; j2 < p.J; ++j2)
        for (std::size_t l2 = 0; l2 < p.L; ++l2) {
          const Filter& g = bank.filters[j2 * p.L + l2];
          auto need = [](long b, std::size_t w, std::size_t n) -> std::size_t {
            if (w >= n) return n;
            const long hi = std::max(std::abs(b), std::abs(b + static_cast<long>(w) - 1));
            return static_cast<std::size_t>(2 * hi + 2);  // fftfreq of size 2h+2 spans [-(h+1), h]
          };
          need1 = std::max(need1, need(g.b1, g.w1, bank.n1));
          need2 = std::max(need2, need(g.b2, g.w2, bank.n2));
        }
      f.u1 = need1 >= bank.n1 ? bank.n1 : grid_size(need1, bank.n1);
      f.u2 = need2 >= bank.n2 ? bank.n2 : grid_size(need2, bank.n2);
    }
  return bank;
}

/// Complex elements added to each row of a work grid: rows of a power-of-two length laid
/// end to end put a column's elements in a few cache sets, and FFTW_ESTIMATE plans for
/// 256 × 256 then ran ~10× slower than with padded rows (bench_stats prints both).
constexpr std::size_t row_pad = 8;

/// Where the work grid holds non-zero values after a convolution: rows [start, start+len)
/// (mod g1) of g2 values, or columns [start, start+len) (mod g2) of every row.
struct Dirty {
  std::size_t g1 = 0, g2 = 0, pitch = 0;
  bool rows = true;
  std::size_t start = 0, len = 0;
};

/// Scratch reused across calls on one thread (fresh pages fault on every first touch).
/// `work` is all zeros outside `dirty`, so a convolution clears only what the last one wrote.
struct Scratch {
  fft::Buffer<cf> half, work, out, box;
  fft::Buffer<float> u1;
  Dirty dirty;
  void fit_work(std::size_t n) {
    if (work.size() >= n) return;
    work = fft::Buffer<cf>(n);
    std::fill(work.data(), work.data() + n, cf(0.0f, 0.0f));
    dirty = Dirty{};
  }
  void clean() {
    const Dirty& d = dirty;
    const cf zero(0.0f, 0.0f);
    if (d.rows) {
      for (std::size_t t = 0; t < d.len; ++t) {
        cf* row = work.data() + ((d.start + t) % d.g1) * d.pitch;
        std::fill(row, row + d.g2, zero);
      }
    } else if (d.len > 0) {
      const std::size_t first = std::min(d.len, d.g2 - d.start);
      for (std::size_t r = 0; r < d.g1; ++r) {
        cf* row = work.data() + r * d.pitch;
        std::fill(row + d.start, row + d.start + first, zero);
        std::fill(row, row + (d.len - first), zero);
      }
    }
    dirty = Dirty{};
  }
  static void fit(fft::Buffer<cf>& b, std::size_t n) {
    if (b.size() < n) b = fft::Buffer<cf>(n);
  }
  static void fit(fft::Buffer<float>& b, std::size_t n) {
    if (b.size() < n) b = fft::Buffer<float>(n);
  }
};

/// Full spectrum of a real p1 × p2 field (r2c, then the mirror half by Hermitian symmetry),
/// so the per-filter gathers below are plain strided copies.
struct Spectrum {
  std::size_t p1 = 0, p2 = 0;
  fft::Buffer<cf> data;
};

void forward(const float* real, std::size_t p1, std::size_t p2, Scratch& scratch, Spectrum& s) {
  const std::size_t h2 = p2 / 2 + 1;
  Scratch::fit(scratch.half, p1 * h2);
  Scratch::fit(s.data, p1 * p2);
  s.p1 = p1;
  s.p2 = p2;
  fft::r2c_2d(p1, p2, real, scratch.half.data());
  for (std::size_t a = 0; a < p1; ++a) {
    const cf* src = scratch.half.data() + a * h2;
    const cf* mirror = scratch.half.data() + ((p1 - a) % p1) * h2;
    cf* dst = s.data.data() + a * p2;
    for (std::size_t b = 0; b < h2; ++b) dst[b] = src[b];
    for (std::size_t b = h2; b < p2; ++b) dst[b] = std::conj(mirror[p2 - b]);
  }
}

/// Σ |w| over g1 rows of g2 complex values `pitch` apart; with Store, also out[i] = scale |w_i|
/// (g1 × g2 contiguous). Eight float partial sums per row keep the loop vectorised (sqrtf
/// vectorises with -fno-math-errno, see CMakeLists.txt); rows are summed in double.
template <bool Store>
[[gnu::always_inline]] inline double modulus_sum(const cf* work, std::size_t g1, std::size_t g2, std::size_t pitch,
                                                 float scale, float* out) {
  constexpr std::size_t lanes = 8;
  double total = 0.0;
  for (std::size_t r = 0; r < g1; ++r) {
    const float* w = reinterpret_cast<const float*>(work + r * pitch);
    float* o = Store ? out + r * g2 : nullptr;
    float acc[lanes] = {};
    std::size_t k = 0;
    for (; k + lanes <= g2; k += lanes)
      for (std::size_t t = 0; t < lanes; ++t) {
        const float re = w[2 * (k + t)], im = w[2 * (k + t) + 1];
        const float v = std::sqrt(re * re + im * im);
        acc[t] += v;
        if constexpr (Store) o[k + t] = v * scale;
      }
    float rest = 0.0f;
    for (; k < g2; ++k) {
      const float v = std::sqrt(w[2 * k] * w[2 * k] + w[2 * k + 1] * w[2 * k + 1]);
      rest += v;
      if constexpr (Store) o[k] = v * scale;
    }
    float row = rest;
    for (std::size_t t = 0; t < lanes; ++t) row += acc[t];
    total += static_cast<double>(row);
  }
  return total * static_cast<double>(scale);
}

// The modulus loops are compiled twice, for AVX2 and the baseline, and picked at load time
// (the build targets baseline x86-64; FFTW picks its own SIMD at run time likewise).
#if defined(__x86_64__) && defined(__GNUC__) && !defined(__clang__)
#define SPINFLIP_SIMD_CLONES [[gnu::target_clones("avx2", "default")]]
#else
#define SPINFLIP_SIMD_CLONES
#endif
SPINFLIP_SIMD_CLONES double modulus_mean_only(const cf* work, std::size_t g1, std::size_t g2, std::size_t pitch,
                                              float scale) {
  return modulus_sum<false>(work, g1, g2, pitch, scale, nullptr);
}
SPINFLIP_SIMD_CLONES double modulus_mean_store(const cf* work, std::size_t g1, std::size_t g2, std::size_t pitch,
                                               float scale, float* out) {
  return modulus_sum<true>(work, g1, g2, pitch, scale, out);
}

/// dst[t] = src[t] v[t] for t < n (complex times real, as interleaved floats).
SPINFLIP_SIMD_CLONES void multiply_run(cf* dst, const cf* src, const float* v, std::size_t n) {
  float* d = reinterpret_cast<float*>(dst);
  const float* s = reinterpret_cast<const float*>(src);
  for (std::size_t t = 0; t < n; ++t) {
    d[2 * t] = s[2 * t] * v[t];
    d[2 * t + 1] = s[2 * t + 1] * v[t];
  }
}

/// Row length for a compact buffer of n complex values: a multiple of 8 (64-byte rows),
/// moved off large powers of two like the work grid's rows.
std::size_t compact_pitch(std::size_t n) {
  std::size_t p = (n + 7) / 8 * 8;
  if (p >= 64 && (p & (p - 1)) == 0) p += row_pad;
  return p;
}

/// mean |x⋆ψ| on a g1 × g2 grid from the spectrum of x, scaled to the fine-grid definition;
/// with `store`, the samples |x⋆ψ| too (g1 × g2 contiguous).
///
/// The box of x̂ψ̂ lands in grid rows [r0, r0+w1) and columns [d0, d0+w2) (mod the grid). The
/// inverse is two passes of 1D transforms, and when the box leaves rows or columns empty the
/// first pass skips them: either the box's rows (zero-padded to g2) are gathered into a
/// compact buffer and transformed along axis 1 into the work grid, then every column; or the
/// box's columns (zero-padded to g1), then every row. Column passes (stride `pitch`) cost about
/// twice as much per element as row passes, and each pass runs faster out of place than in
/// place (both measured on 256 × 256 and 256 × 128 grids), hence the cost model and buffers.
double modulus_conv(const Spectrum& x, const Filter& f, std::size_t g1, std::size_t g2, Scratch& scratch,
                    float* store) {
  using fft::Direction;
  const std::size_t pitch = g2 + row_pad;
  scratch.fit_work(g1 * pitch);
  Scratch::fit(scratch.out, g1 * pitch);
  scratch.clean();  // the work grid is all zeros from here
  scratch.dirty = Dirty{g1, g2, pitch, true, 0, g1};  // until the transforms below return (an exception)
  cf* work = scratch.work.data();
  cf* out = scratch.out.data();
  const std::size_t w1 = f.w1, w2 = f.w2;
  const std::size_t s0 = static_cast<std::size_t>(wrap(f.b2, x.p2));
  const std::size_t d0 = static_cast<std::size_t>(wrap(f.b2 - f.c2, g2));
  const std::size_t r0 = static_cast<std::size_t>(wrap(f.b1 - f.c1, g1));
  auto source_row = [&](std::size_t i) {
    return x.data.data() + static_cast<std::size_t>(wrap(f.b1 + static_cast<long>(i), x.p1)) * x.p2;
  };
  // Box row i times ψ̂ into dst, whose column k of the box is at dst[(d + k) mod len]: at most
  // two runs in the source and in the destination (each wraps once).
  auto put_row = [&](std::size_t i, cf* dst, std::size_t d, std::size_t len) {
    const cf* src = source_row(i);
    const float* v = f.value.data() + i * w2;
    std::size_t k = 0, s = s0;
    while (k < w2) {
      const std::size_t run = std::min({w2 - k, x.p2 - s, len - d});
      multiply_run(dst + d, src + s, v + k, run);
      k += run;
      s = (s + run) % x.p2;
      d = (d + run) % len;
    }
  };
  const cf zero(0.0f, 0.0f);
  if (w1 >= g1 && w2 >= g2) {  // nothing empty: gather in place, one 2D transform
    for (std::size_t i = 0; i < w1; ++i) put_row(i, work + ((r0 + i) % g1) * pitch, d0, g2);
    fft::c2c_2d_pitched(g1, g2, work, pitch, out, pitch, Direction::inverse);
    scratch.dirty = Dirty{g1, g2, pitch, true, 0, g1};
  } else {
    const double row = static_cast<double>(g2) * std::log2(static_cast<double>(g2) + 1.0);
    const double col = 2.0 * static_cast<double>(g1) * std::log2(static_cast<double>(g1) + 1.0);
    const bool rows_first = static_cast<double>(w1) * row + static_cast<double>(g2) * col <
                            static_cast<double>(w2) * col + static_cast<double>(g1) * row;
    if (rows_first) {
      const std::size_t bp = compact_pitch(g2);
      Scratch::fit(scratch.box, w1 * bp);
      cf* box = scratch.box.data();
      for (std::size_t i = 0; i < w1; ++i) {
        cf* dst = box + i * bp;
        if (w2 < g2) {  // columns after the box, up to its start again (at most two runs)
          const std::size_t z0 = (d0 + w2) % g2, zl = g2 - w2, first = std::min(zl, g2 - z0);
          std::fill(dst + z0, dst + z0 + first, zero);
          std::fill(dst, dst + (zl - first), zero);
        }
        put_row(i, dst, d0, g2);
      }
      const std::size_t first = std::min(w1, g1 - r0);  // grid rows [r0, g1), then [0, ...)
      fft::c2c_1d_batch(g2, first, box, 1, bp, work + r0 * pitch, 1, pitch, Direction::inverse);
      if (first < w1) fft::c2c_1d_batch(g2, w1 - first, box + first * bp, 1, bp, work, 1, pitch, Direction::inverse);
      fft::c2c_1d_batch(g1, g2, work, pitch, 1, out, pitch, 1, Direction::inverse);
      scratch.dirty = Dirty{g1, g2, pitch, true, r0, w1};
    } else {
      const std::size_t bp = compact_pitch(w2);
      Scratch::fit(scratch.box, g1 * bp);
      cf* box = scratch.box.data();
      for (std::size_t r = 0; r < g1; ++r) {
        const std::size_t i = (r + g1 - r0) % g1;  // box row landing on grid row r
        if (i >= w1)
          std::fill(box + r * bp, box + r * bp + w2, zero);
        else
          put_row(i, box + r * bp, 0, w2);
      }
      const std::size_t first = std::min(w2, g2 - d0);  // grid columns [d0, g2), then [0, ...)
      fft::c2c_1d_batch(g1, first, box, bp, 1, work + d0, pitch, 1, Direction::inverse);
      if (first < w2) fft::c2c_1d_batch(g1, w2 - first, box + first, bp, 1, work, pitch, 1, Direction::inverse);
      fft::c2c_1d_batch(g2, g1, work, 1, pitch, out, 1, pitch, Direction::inverse);
      scratch.dirty = Dirty{g1, g2, pitch, false, d0, w2};
    }
  }
  const float scale = 1.0f / static_cast<float>(x.p1 * x.p2);  // unnormalised inverse of an unnormalised forward
  const double sum = store ? modulus_mean_store(out, g1, g2, pitch, scale, store)
                           : modulus_mean_only(out, g1, g2, pitch, scale);
  return sum / static_cast<double>(g1 * g2);
}

double mean(const float* v, std::size_t n) {
  double s = 0.0;
  for (std::size_t i = 0; i < n; ++i) s += v[i];
  return s / static_cast<double>(n);
}

struct ShapeKey {
  std::size_t n1, n2;
  bool operator==(const ShapeKey&) const = default;
};

class ScatteringKernel final : public Kernel {
 public:
  explicit ScatteringKernel(ScatteringParams p) : p_(p) {}
  const std::string& name() const override { return name_; }
  UnitKind unit_kind() const override { return UnitKind::slice; }

  void check(const Geometry& g) const override {
    require_dims(name_, g, UnitKind::slice);
    const std::size_t need = std::size_t{1} << p_.J;
    if (g.shape[0] < need || g.shape[1] < need)
      throw InputError("stats.scattering.scales = " + std::to_string(p_.J) + " needs slices of at least " +
                       std::to_string(need) + " × " + std::to_string(need) + " cells (2^scales), got " +
                       shape_text(g.shape));
  }

  std::size_t n_coeff(const Geometry&) const override {
    const std::size_t J = p_.J, L = p_.L, pairs = J * (J - 1) / 2;
    return p_.rotation ? 1 + J + pairs * L : 1 + J * L + pairs * L * L;
  }

  std::vector<Axis> axes(const Geometry& g) const override {
    std::vector<std::int64_t> order, j1, l1, j2, l2;
    auto push = [&](int o, long a, long b, long c, long d) {
      order.push_back(o), j1.push_back(a), l1.push_back(b), j2.push_back(c), l2.push_back(d);
    };
    const long J = static_cast<long>(p_.J), L = static_cast<long>(p_.L);
    push(0, -1, -1, -1, -1);
    for (long j = 0; j < J; ++j)
      for (long l = 0; l < (p_.rotation ? 1 : L); ++l) push(1, j, p_.rotation ? -1 : l, -1, -1);
    for (long a = 0; a < J; ++a)
      for (long la = 0; la < (p_.rotation ? 1 : L); ++la)
        for (long b = a + 1; b < J; ++b)
          for (long lb = 0; lb < L; ++lb) push(2, a, p_.rotation ? -1 : la, b, lb);
    (void)g;
    return {{"order", order}, {"j1", j1}, {"l1", l1}, {"j2", j2}, {"l2", l2}};
  }

  std::vector<double> measure(const float* data, const Geometry& g) const override {
    check(g);
    const std::size_t n1 = g.shape[0], n2 = g.shape[1], J = p_.J, L = p_.L;
    auto bank = cache_.get(ShapeKey{n1, n2}, [&] { return build_bank(p_, n1, n2); });
    thread_local Scratch scratch;
    thread_local Spectrum x, ux;
    fft::Buffer<float> copy;
    forward(aligned(data, n1 * n2, copy), n1, n2, scratch, x);
    Scratch::fit(scratch.u1, n1 * n2);

    const double s0 = mean(data, n1 * n2);
    std::vector<double> s1(J * L);
    std::vector<double> s2(J * L * J * L, 0.0);  // [j1][l1][j2][l2], j2 > j1 filled
    for (std::size_t ja = 0; ja < J; ++ja)
      for (std::size_t la = 0; la < L; ++la) {
        const Filter& fa = bank->filters[ja * L + la];
        const bool last = ja + 1 == J;
        s1[ja * L + la] = modulus_conv(x, fa, fa.u1, fa.u2, scratch, last ? nullptr : scratch.u1.data());
        if (last) continue;
        forward(scratch.u1.data(), fa.u1, fa.u2, scratch, ux);
        for (std::size_t jb = ja + 1; jb < J; ++jb)
          for (std::size_t lb = 0; lb < L; ++lb) {
            const Filter& fb = bank->filters[jb * L + lb];
            s2[((ja * L + la) * J + jb) * L + lb] = modulus_conv(ux, fb, fb.m1, fb.m2, scratch, nullptr);
          }
      }
    if (p_.normalise)
      for (std::size_t a = 0; a < J * L; ++a)
        for (std::size_t b = 0; b < J * L; ++b) s2[a * J * L + b] = s1[a] > 0 ? s2[a * J * L + b] / s1[a] : std::nan("");

    std::vector<double> out{s0};
    if (!p_.rotation) {
      out.insert(out.end(), s1.begin(), s1.end());
      for (std::size_t ja = 0; ja < J; ++ja)
        for (std::size_t la = 0; la < L; ++la)
          for (std::size_t jb = ja + 1; jb < J; ++jb)
            for (std::size_t lb = 0; lb < L; ++lb) out.push_back(s2[((ja * L + la) * J + jb) * L + lb]);
    } else {
      for (std::size_t j = 0; j < J; ++j)
        out.push_back(std::accumulate(s1.begin() + j * L, s1.begin() + (j + 1) * L, 0.0) / static_cast<double>(L));
      for (std::size_t ja = 0; ja < J; ++ja)
        for (std::size_t jb = ja + 1; jb < J; ++jb)
          for (std::size_t d = 0; d < L; ++d) {
            double sum = 0.0;
            for (std::size_t la = 0; la < L; ++la) sum += s2[((ja * L + la) * J + jb) * L + (la + d) % L];
            out.push_back(sum / static_cast<double>(L));
          }
    }
    return out;
  }

  Attributes attributes() const override {
    return {{"kernel", std::string("wavelet scattering")},
            {"scales", static_cast<std::int64_t>(p_.J)},
            {"orientations", static_cast<std::int64_t>(p_.L)},
            {"reduce", std::string(p_.rotation ? "rotation" : "none")},
            {"normalise", std::int64_t{p_.normalise ? 1 : 0}},
            {"xi0", p_.xi0},
            {"sigma0", p_.sigma0},
            {"slant", p_.slant},
            {"crop", p_.crop}};
  }

 private:
  std::string name_ = "scattering";
  ScatteringParams p_;
  TableCache<ShapeKey, Bank> cache_;
};

}  // namespace

std::unique_ptr<Kernel> make_scattering(const core::Config& c) {
  const std::string t = "stats.scattering";
  ScatteringParams p;
  p.J = static_cast<std::size_t>(c.integer(t + ".scales"));
  p.L = static_cast<std::size_t>(c.integer(t + ".orientations"));
  p.xi0 = c.real(t + ".xi0");
  p.sigma0 = c.real(t + ".sigma0");
  p.slant = c.real(t + ".slant") > 0.0 ? c.real(t + ".slant") : 4.0 / static_cast<double>(p.L);
  p.rotation = c.string(t + ".reduce") == "rotation";
  p.normalise = c.boolean(t + ".normalise");
  p.crop = c.boolean(t + ".crop");
  return std::make_unique<ScatteringKernel>(p);
}

}  // namespace spinflip::stats::detail
