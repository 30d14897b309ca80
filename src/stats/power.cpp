// Power spectra (DESIGN.md §6): spherical/circular P(k) and delta2 of chunks and
// slices, cylindrical P(k_perp, k_par) of chunks. One r2c transform per unit;
// the full Fourier grid is counted on the half grid by weighting each plane of
// the last axis by half_plane_weight (mirror modes have the same |F|²).
#include <algorithm>
#include <limits>

#include "fft/fft.hpp"
#include "stats/internal.hpp"

namespace spinflip::stats::detail {
namespace {

struct GeomKey {
  std::vector<std::size_t> shape;
  std::array<double, 3> cell;
  bool operator==(const GeomKey&) const = default;
};
GeomKey key_of(const Geometry& g) { return {g.shape, g.cell_mpc}; }

/// Unit geometry seen as n0 × n1 × n2 with the half axis last (a slice is 1 × n0 × n1).
struct Dims {
  std::size_t n0, n1, n2, h2;
  double c0, c1, c2;
  bool two_d;
};
Dims dims_of(const Geometry& g) {
  if (g.shape.size() == 2) return {1, g.shape[0], g.shape[1], g.shape[1] / 2 + 1, 1.0, g.cell(0), g.cell(1), true};
  return {g.shape[0], g.shape[1], g.shape[2], g.shape[2] / 2 + 1, g.cell(0), g.cell(1), g.cell(2), false};
}

/// Forward transform of a unit into the half grid (n0 n1 h2 complex). The result
/// lives in a per-thread workspace reused by the next call on the same thread:
/// a chunk's spectrum is ~70 MB and fresh pages cost as much as the binning.
const fft::cfloat* transform(const float* input, const Geometry& g, int slot = 0) {
  thread_local fft::Buffer<float> copy;
  thread_local fft::Buffer<fft::cfloat> outs[2];  // slot 1: the second field of a cross-power
  fft::Buffer<fft::cfloat>& out = outs[slot];
  const Dims d = dims_of(g);
  const float* data = input;
  if (reinterpret_cast<std::uintptr_t>(input) % 64 != 0) {  // FFTW plans by alignment: keep results bit-identical
    if (copy.size() < g.n_cells()) copy = fft::Buffer<float>(g.n_cells());
    std::copy(input, input + g.n_cells(), copy.data());
    data = copy.data();
  }
  if (out.size() < d.n0 * d.n1 * d.h2) out = fft::Buffer<fft::cfloat>(d.n0 * d.n1 * d.h2);
  if (d.two_d)
    fft::r2c_2d(d.n1, d.n2, data, out.data());
  else
    fft::r2c_3d({d.n0, d.n1, d.n2}, data, out.data());
  return out.data();
}

double cell_volume(const Geometry& g) {
  double v = 1.0;
  for (std::size_t a = 0; a < g.shape.size(); ++a) v *= g.cell(a);
  return v;
}

std::vector<double> axis_k2(std::size_t n, double cell) {
  std::vector<double> k2(n);
  for (std::size_t i = 0; i < n; ++i) k2[i] = std::pow(wavenumber(i, n, cell), 2);
  return k2;
}

const double nan = std::numeric_limits<double>::quiet_NaN();

/// |F|² of one field, or Re(F_a F_b*) of two (the cross-power of independent noise
/// realisations: the noise terms average to zero, the signal term is |F_signal|²).
inline double mode_power(const fft::cfloat* fa, const fft::cfloat* fb, std::size_t idx) {
  const std::complex<double> a(fa[idx]);
  if (!fb) return std::norm(a);
  const std::complex<double> b(fb[idx]);
  return a.real() * b.real() + a.imag() * b.imag();
}

// ---------------------------------------------------------------- spherical
// Along the half axis |k| grows with the index, so within one row (i, j) each bin is a
// run of consecutive modes: row r's modes of bin b are [seg[r(B+1) + b], seg[r(B+1) + b + 1]).
// The measurement then reads only the spectrum (no per-mode table) and computes |k|^D
// from the row's k0² + k1² and the axis table, exactly as the table was built.
struct SphericalTable {
  std::vector<std::uint32_t> seg;  // rows × (bins + 1) run starts
  std::vector<double> row_k2;      // k0² + k1² per row
  std::vector<double> axis_k2;     // k2² along the half axis
  std::vector<double> n_modes, k_mean;
};

class PowerKernel final : public Kernel {
 public:
  PowerKernel(std::string name, UnitKind kind, std::vector<double> edges, bool log_bins)
      : name_(std::move(name)), kind_(kind), edges_(std::move(edges)), log_bins_(log_bins) {}

  const std::string& name() const override { return name_; }
  UnitKind unit_kind() const override { return kind_; }
  void check(const Geometry& g) const override { require_dims(name_, g, kind_); }
  std::size_t n_coeff(const Geometry&) const override { return 2 * bins(); }

  std::vector<Axis> axes(const Geometry& g) const override {
    check(g);
    auto t = table(g);
    std::vector<std::int64_t> quantity, n_modes;
    std::vector<double> lo, hi, km;
    for (int q = 0; q < 2; ++q)
      for (std::size_t b = 0; b < bins(); ++b) {
        quantity.push_back(q);
        lo.push_back(edges_[b]);
        hi.push_back(edges_[b + 1]);
        km.push_back(t->n_modes[b] > 0 ? t->k_mean[b] : nan);
        n_modes.push_back(static_cast<std::int64_t>(t->n_modes[b]));
      }
    return {{"quantity", quantity}, {"k_lo", lo}, {"k_hi", hi}, {"k_mean", km}, {"n_modes", n_modes}};
  }

  std::vector<double> measure(const float* data, const Geometry& g) const override {
    check(g);
    auto t = table(g);
    const Dims d = dims_of(g);
    auto f = transform(data, g);
    const bool two_d = d.two_d;
    std::vector<double> p(bins(), 0.0), dk(bins(), 0.0);
    std::vector<double> w(d.h2);
    for (std::size_t k = 0; k < d.h2; ++k) w[k] = half_plane_weight(k, d.n2);
    const std::size_t nb = bins();
    const double* ax = t->axis_k2.data();
    for (std::size_t row = 0; row < d.n0 * d.n1; ++row) {
      const std::uint32_t* seg = t->seg.data() + row * (nb + 1);
      if (seg[0] == seg[nb]) continue;
      const float* fr = reinterpret_cast<const float*>(f + row * d.h2);
      const double base = t->row_k2[row];
      for (std::size_t b = 0; b < nb; ++b) {
        double pa[2] = {0.0, 0.0}, da[2] = {0.0, 0.0};  // two chains: the adds do not wait on each other
        for (std::size_t k = seg[b]; k < seg[b + 1]; ++k) {
          const double p2 = w[k] * (double(fr[2 * k]) * fr[2 * k] + double(fr[2 * k + 1]) * fr[2 * k + 1]);
          const double kk = std::sqrt(base + ax[k]);
          const auto kp = static_cast<float>(two_d ? kk * kk : kk * kk * kk);  // |k|² (2D) or |k|³ (3D)
          pa[k & 1] += p2;
          da[k & 1] += p2 * kp;
        }
        p[b] += pa[0] + pa[1];
        dk[b] += da[0] + da[1];
      }
    }
    // P̂ = ΔV² |F|² / V = ΔV |F|² / N (DESIGN.md §6); delta2 = |k|^D P̂ / (2π) or (2π²).
    const double dv = cell_volume(g), n = static_cast<double>(g.n_cells());
    const double delta_norm = two_d ? 1.0 / (2.0 * M_PI) : 1.0 / (2.0 * M_PI * M_PI);
    std::vector<double> out(2 * bins());
    for (std::size_t b = 0; b < bins(); ++b) {
      const double m = t->n_modes[b];
      out[b] = m > 0 ? p[b] * dv / n / m : nan;
      out[bins() + b] = m > 0 ? dk[b] * dv / n / m * delta_norm : nan;
    }
    return out;
  }

  std::vector<double> measure_kept(const float* data, const Geometry& g, const KeptModes& kept) const override {
    if (kept.all()) return measure(data, g);  // the clean path, byte for byte
    check(g);
    return over_kept(transform(data, g), nullptr, g, kept).values;
  }

  std::vector<double> measure_cross(const float* a, const float* b, const Geometry& g,
                                    const KeptModes& kept) const override {
    check(g);
    const fft::cfloat* fa = transform(a, g, 0);
    return over_kept(fa, transform(b, g, 1), g, kept).values;
  }

  std::vector<Axis> axes_kept(const Geometry& g, const KeptModes& kept) const override {
    if (kept.all()) return axes(g);
    check(g);
    const auto counts = over_kept(nullptr, nullptr, g, kept);
    auto ax = axes(g);
    for (auto& a : ax) {
      if (a.name == "k_mean") {
        auto& v = std::get<std::vector<double>>(a.values);
        for (std::size_t c = 0; c < v.size(); ++c) v[c] = counts.k_mean[c % bins()];
      } else if (a.name == "n_modes") {
        auto& v = std::get<std::vector<std::int64_t>>(a.values);
        for (std::size_t c = 0; c < v.size(); ++c) v[c] = static_cast<std::int64_t>(counts.n_modes[c % bins()]);
      }
    }
    return ax;
  }

  Attributes attributes() const override {
    return {{"kernel", std::string(kind_ == UnitKind::chunk ? "spherical power spectrum" : "2D power spectrum")},
            {"bins", static_cast<std::int64_t>(bins())},
            {"k_min_mpc", edges_.front()},
            {"k_max_mpc", edges_.back()},
            {"log_bins", log_bins_},
            {"quantity_names", std::vector<std::string>{"power", "delta2"}},
            {"power_unit", std::string(kind_ == UnitKind::chunk ? "mK^2 Mpc^3" : "mK^2 Mpc^2")},
            {"delta2_unit", std::string("mK^2")}};
  }

 private:
  std::size_t bins() const { return edges_.size() - 1; }

  struct KeptResult {
    std::vector<double> values, n_modes, k_mean;
  };
  /// P and delta2 over the kept modes of spectrum fa (cross with fb if given); with
  /// fa null only the counts. Each kept mode counts once in n_modes and weighs its
  /// squared taper weight in the normaliser, so a taper does not bias P low.
  KeptResult over_kept(const fft::cfloat* fa, const fft::cfloat* fb, const Geometry& g, const KeptModes& kept) const {
    auto t = table(g);
    const Dims d = dims_of(g);
    const KeptView view(kept, g);
    const std::size_t nb = bins();
    std::vector<double> p(nb, 0.0), dk(nb, 0.0), norm(nb, 0.0);
    KeptResult r{std::vector<double>(2 * nb), std::vector<double>(nb, 0.0), std::vector<double>(nb, 0.0)};
    for (std::size_t row = 0; row < d.n0 * d.n1; ++row) {
      const std::uint32_t* seg = t->seg.data() + row * (nb + 1);
      for (std::size_t b = 0; b < nb; ++b)
        for (std::size_t k = seg[b]; k < seg[b + 1]; ++k) {
          if (!view.keeps(row, k)) continue;
          const double w = half_plane_weight(k, d.n2), kk = std::sqrt(t->row_k2[row] + t->axis_k2[k]);
          r.n_modes[b] += w;
          r.k_mean[b] += w * kk;
          norm[b] += w * view.weight2(row, k);
          if (!fa) continue;
          const double p2 = w * mode_power(fa, fb, row * d.h2 + k);
          p[b] += p2;
          dk[b] += p2 * (d.two_d ? kk * kk : kk * kk * kk);
        }
    }
    const double dv = cell_volume(g), n = static_cast<double>(g.n_cells());
    const double delta_norm = d.two_d ? 1.0 / (2.0 * M_PI) : 1.0 / (2.0 * M_PI * M_PI);
    for (std::size_t b = 0; b < nb; ++b) {
      const bool any = r.n_modes[b] > 0;
      r.k_mean[b] = any ? r.k_mean[b] / r.n_modes[b] : nan;
      r.values[b] = any ? p[b] * dv / n / norm[b] : nan;
      r.values[nb + b] = any ? dk[b] * dv / n / norm[b] * delta_norm : nan;
    }
    return r;
  }

  std::shared_ptr<const SphericalTable> table(const Geometry& g) const {
    return cache_.get(key_of(g), [&] {
      const Dims d = dims_of(g);
      SphericalTable t;
      const std::size_t nb = bins();
      t.seg.assign(d.n0 * d.n1 * (nb + 1), 0);
      t.row_k2.resize(d.n0 * d.n1);
      t.n_modes.assign(nb, 0.0);
      t.k_mean.assign(nb, 0.0);
      const auto k0 = axis_k2(d.n0, d.c0), k1 = axis_k2(d.n1, d.c1), k2 = axis_k2(d.n2, d.c2);
      t.axis_k2.assign(k2.begin(), k2.begin() + static_cast<std::ptrdiff_t>(d.h2));
      for (std::size_t i = 0, row = 0; i < d.n0; ++i)
        for (std::size_t j = 0; j < d.n1; ++j, ++row) {
          const double base = k0[i] + k1[j];
          t.row_k2[row] = base;
          std::uint32_t* seg = t.seg.data() + row * (nb + 1);
          long last = -1;
          for (std::size_t k = 0; k < d.h2; ++k) {
            const double kk = std::sqrt(base + k2[k]);
            // Run code: -1 below the bins (and k = 0), nb above them, else the bin.
            long code = -1;
            if (kk >= edges_.back()) code = static_cast<long>(nb);
            else if (kk > 0.0 && kk >= edges_.front())
              code = std::upper_bound(edges_.begin(), edges_.end(), kk) - edges_.begin() - 1;
            if (code < last) throw InternalError("power spectrum: |k| is not monotone along the half axis");
            last = code;
            for (long b = code + 1; b <= static_cast<long>(nb); ++b) seg[b] = static_cast<std::uint32_t>(k + 1);
            if (code < 0 || code >= static_cast<long>(nb)) continue;
            const double w = half_plane_weight(k, d.n2);
            t.n_modes[static_cast<std::size_t>(code)] += w;
            t.k_mean[static_cast<std::size_t>(code)] += w * kk;
          }
        }
      for (std::size_t b = 0; b < bins(); ++b)
        if (t.n_modes[b] > 0) t.k_mean[b] /= t.n_modes[b];
      return t;
    });
  }

  std::string name_;
  UnitKind kind_;
  std::vector<double> edges_;
  bool log_bins_;
  TableCache<GeomKey, SphericalTable> cache_;
};

// ---------------------------------------------------------------- cylindrical
struct CylTable {
  std::vector<std::int32_t> perp_bin;  // n0 × n1
  std::vector<std::int32_t> par_bin;   // h2
  std::vector<double> n_modes;         // kperp-major
};

class CylindricalKernel final : public Kernel {
 public:
  CylindricalKernel(std::vector<double> perp, std::vector<double> par, bool log_bins)
      : perp_(std::move(perp)), par_(std::move(par)), log_bins_(log_bins) {}

  const std::string& name() const override { return name_; }
  UnitKind unit_kind() const override { return UnitKind::chunk; }
  void check(const Geometry& g) const override { require_dims(name_, g, UnitKind::chunk); }
  std::size_t n_coeff(const Geometry&) const override { return np() * nq(); }

  std::vector<Axis> axes(const Geometry& g) const override {
    check(g);
    auto t = table(g);
    std::vector<double> plo, phi, qlo, qhi;
    std::vector<std::int64_t> n;
    for (std::size_t a = 0; a < np(); ++a)
      for (std::size_t b = 0; b < nq(); ++b) {
        plo.push_back(perp_[a]);
        phi.push_back(perp_[a + 1]);
        qlo.push_back(par_[b]);
        qhi.push_back(par_[b + 1]);
        n.push_back(static_cast<std::int64_t>(t->n_modes[a * nq() + b]));
      }
    return {{"kperp_lo", plo}, {"kperp_hi", phi}, {"kpar_lo", qlo}, {"kpar_hi", qhi}, {"n_modes", n}};
  }

  std::vector<double> measure(const float* data, const Geometry& g) const override {
    check(g);
    auto t = table(g);
    const Dims d = dims_of(g);
    auto f = transform(data, g);
    std::vector<double> acc(np() * nq(), 0.0);
    std::size_t idx = 0;
    for (std::size_t ij = 0; ij < d.n0 * d.n1; ++ij) {
      const std::int32_t a = t->perp_bin[ij];
      if (a < 0) {
        idx += d.h2;
        continue;
      }
      double* row = acc.data() + static_cast<std::size_t>(a) * nq();
      for (std::size_t k = 0; k < d.h2; ++k, ++idx) {
        const std::int32_t b = t->par_bin[k];
        if (b < 0 || (ij == 0 && k == 0)) continue;
        row[b] += half_plane_weight(k, d.n2) * std::norm(std::complex<double>(f[idx]));
      }
    }
    const double dv = cell_volume(g), n = static_cast<double>(g.n_cells());
    for (std::size_t c = 0; c < acc.size(); ++c) acc[c] = t->n_modes[c] > 0 ? acc[c] * dv / n / t->n_modes[c] : nan;
    return acc;
  }

  std::vector<double> measure_kept(const float* data, const Geometry& g, const KeptModes& kept) const override {
    if (kept.all()) return measure(data, g);  // the clean path, byte for byte
    check(g);
    return over_kept(transform(data, g), nullptr, g, kept).first;
  }

  std::vector<double> measure_cross(const float* a, const float* b, const Geometry& g,
                                    const KeptModes& kept) const override {
    check(g);
    const fft::cfloat* fa = transform(a, g, 0);
    return over_kept(fa, transform(b, g, 1), g, kept).first;
  }

  std::vector<Axis> axes_kept(const Geometry& g, const KeptModes& kept) const override {
    if (kept.all()) return axes(g);
    check(g);
    const auto counts = over_kept(nullptr, nullptr, g, kept).second;
    auto ax = axes(g);
    for (auto& a : ax)
      if (a.name == "n_modes") {
        auto& v = std::get<std::vector<std::int64_t>>(a.values);
        for (std::size_t c = 0; c < v.size(); ++c) v[c] = static_cast<std::int64_t>(counts[c]);
      }
    return ax;
  }

  Attributes attributes() const override {
    return {{"kernel", std::string("cylindrical power spectrum")},
            {"kperp_bins", static_cast<std::int64_t>(np())},
            {"kpar_bins", static_cast<std::int64_t>(nq())},
            {"kperp_min_mpc", perp_.front()},
            {"kperp_max_mpc", perp_.back()},
            {"kpar_min_mpc", par_.front()},
            {"kpar_max_mpc", par_.back()},
            {"log_bins", log_bins_},
            {"power_unit", std::string("mK^2 Mpc^3")}};
  }

 private:
  std::size_t np() const { return perp_.size() - 1; }
  std::size_t nq() const { return par_.size() - 1; }
  /// (P per bin over kept modes, kept-mode count per bin); fa null: counts only.
  std::pair<std::vector<double>, std::vector<double>> over_kept(const fft::cfloat* fa, const fft::cfloat* fb,
                                                               const Geometry& g, const KeptModes& kept) const {
    auto t = table(g);
    const Dims d = dims_of(g);
    const KeptView view(kept, g);
    std::vector<double> acc(np() * nq(), 0.0), count(np() * nq(), 0.0), norm(np() * nq(), 0.0);
    for (std::size_t ij = 0; ij < d.n0 * d.n1; ++ij) {
      const std::int32_t a = t->perp_bin[ij];
      if (a < 0) continue;
      for (std::size_t k = 0; k < d.h2; ++k) {
        const std::int32_t b = t->par_bin[k];
        if (b < 0 || (ij == 0 && k == 0) || !view.keeps(ij, k)) continue;
        const std::size_t c = static_cast<std::size_t>(a) * nq() + static_cast<std::size_t>(b);
        const double w = half_plane_weight(k, d.n2);
        count[c] += w;
        norm[c] += w * view.weight2(ij, k);
        if (fa) acc[c] += w * mode_power(fa, fb, ij * d.h2 + k);
      }
    }
    const double dv = cell_volume(g), n = static_cast<double>(g.n_cells());
    for (std::size_t c = 0; c < acc.size(); ++c) acc[c] = count[c] > 0 ? acc[c] * dv / n / norm[c] : nan;
    return {acc, count};
  }

  static std::int32_t find_bin(const std::vector<double>& e, double k) {
    if (k < e.front() || k >= e.back()) return -1;
    return static_cast<std::int32_t>(std::upper_bound(e.begin(), e.end(), k) - e.begin() - 1);
  }

  std::shared_ptr<const CylTable> table(const Geometry& g) const {
    return cache_.get(key_of(g), [&] {
      const Dims d = dims_of(g);
      CylTable t;
      t.perp_bin.resize(d.n0 * d.n1);
      t.par_bin.resize(d.h2);
      t.n_modes.assign(np() * nq(), 0.0);
      const auto k0 = axis_k2(d.n0, d.c0), k1 = axis_k2(d.n1, d.c1);
      for (std::size_t i = 0; i < d.n0; ++i)
        for (std::size_t j = 0; j < d.n1; ++j) t.perp_bin[i * d.n1 + j] = find_bin(perp_, std::sqrt(k0[i] + k1[j]));
      for (std::size_t k = 0; k < d.h2; ++k) t.par_bin[k] = find_bin(par_, std::abs(wavenumber(k, d.n2, d.c2)));
      for (std::size_t ij = 0; ij < d.n0 * d.n1; ++ij)
        for (std::size_t k = 0; k < d.h2; ++k) {
          const auto a = t.perp_bin[ij], b = t.par_bin[k];
          if (a >= 0 && b >= 0 && !(ij == 0 && k == 0)) t.n_modes[a * nq() + b] += half_plane_weight(k, d.n2);
        }
      return t;
    });
  }

  std::string name_ = "cylindrical";
  std::vector<double> perp_, par_;
  bool log_bins_;
  TableCache<GeomKey, CylTable> cache_;
};

}  // namespace

std::unique_ptr<Kernel> make_power(const core::Config& c, const std::string& t, UnitKind kind) {
  const double lo = c.real(t + ".k_min_mpc"), hi = c.real(t + ".k_max_mpc");
  if (hi <= lo) c.fail(t + ".k_max_mpc", "must be larger than " + t + ".k_min_mpc = " + std::to_string(lo));
  const bool log_bins = c.boolean(t + ".log_bins");
  if (log_bins && lo <= 0.0) c.fail(t + ".k_min_mpc", "must be > 0 with log_bins = true (0 is allowed for linear bins)");
  const auto name = t.substr(t.find('.') + 1);
  return std::make_unique<PowerKernel>(name, kind, bin_edges(lo, hi, c.integer(t + ".bins"), log_bins), log_bins);
}

std::unique_ptr<Kernel> make_cylindrical(const core::Config& c) {
  const std::string t = "stats.cylindrical";
  const bool log_bins = c.boolean(t + ".log_bins");
  auto edges = [&](const std::string& axis) {
    const double lo = c.real(t + "." + axis + "_min_mpc"), hi = c.real(t + "." + axis + "_max_mpc");
    if (log_bins && lo <= 0.0)
      c.fail(t + "." + axis + "_min_mpc", "must be > 0 with log_bins = true (0 is allowed for linear bins)");
    if (hi <= lo)
      c.fail(t + "." + axis + "_max_mpc", "must be larger than " + axis + "_min_mpc = " + std::to_string(lo));
    return bin_edges(lo, hi, c.integer(t + "." + axis + "_bins"), log_bins);
  };
  return std::make_unique<CylindricalKernel>(edges("kperp"), edges("kpar"), log_bins);
}

}  // namespace spinflip::stats::detail
