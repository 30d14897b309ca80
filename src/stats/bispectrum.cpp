// FFT shell estimator of the bispectrum (Scoccimarro 2015, PRD 92, 083532;
// Watkinson et al. 2017, MNRAS 472, 2436): with I_i(x) the inverse transform of
// δ̃ restricted to shell i and J_i the same for a unit field,
//   B̂ = Σ_x I1 I2 I3 / Σ_x J1 J2 J3 / V = Σ_{k1+k2+k3=0} δ̃1 δ̃2 δ̃3 / (N_tri V),
// and the normalised B̂ / (P1 P2 + P2 P3 + P3 P1) with P_i the shell-averaged P̂.
// Shell fields are real (a shell is symmetric), so each is one c2r transform.
#include <algorithm>
#include <limits>
#include <tuple>

#include "fft/fft.hpp"
#include "stats/internal.hpp"

namespace spinflip::stats::detail {
namespace {

using cf = fft::cfloat;

struct Triangle {
  double k1, k2, angle_deg, k3;
};

struct Dims {
  std::size_t n0, n1, n2, h2;  // slice: 1 × n0 × n1
  std::array<double, 3> cell;
  bool two_d;
  std::size_t n_half() const { return n0 * n1 * h2; }
  std::size_t n_real() const { return n0 * n1 * n2; }
};
Dims dims_of(const Geometry& g) {
  if (g.shape.size() == 2) return {1, g.shape[0], g.shape[1], g.shape[1] / 2 + 1, {1.0, g.cell(0), g.cell(1)}, true};
  return {g.shape[0], g.shape[1], g.shape[2], g.shape[2] / 2 + 1, {g.cell(0), g.cell(1), g.cell(2)}, false};
}

/// |k| of every half-grid mode.
std::vector<float> mode_k(const Dims& d) {
  std::vector<float> k(d.n_half());
  std::size_t idx = 0;
  for (std::size_t i = 0; i < d.n0; ++i)
    for (std::size_t j = 0; j < d.n1; ++j)
      for (std::size_t l = 0; l < d.h2; ++l, ++idx) {
        const double a = wavenumber(i, d.n0, d.cell[0]), b = wavenumber(j, d.n1, d.cell[1]),
                     c = wavenumber(l, d.n2, d.cell[2]);
        k[idx] = static_cast<float>(std::sqrt(a * a + b * b + c * c));
      }
  return k;
}

struct GeomKey {
  std::vector<std::size_t> shape;
  std::array<double, 3> cell;
  bool operator==(const GeomKey&) const = default;
};

struct Table {
  std::vector<float> k;                     // |k| per half-grid mode
  std::vector<double> n_tri;                // closed triangles per configuration
  std::vector<double> shell_modes;          // full-grid modes in each of the 3 shells, per triangle
};

class BispectrumKernel final : public Kernel {
 public:
  BispectrumKernel(std::string name, UnitKind kind, std::vector<Triangle> tri, double fraction, std::string quantity)
      : name_(std::move(name)), kind_(kind), tri_(std::move(tri)), fraction_(fraction), quantity_(std::move(quantity)) {}

  const std::string& name() const override { return name_; }
  UnitKind unit_kind() const override { return kind_; }
  void check(const Geometry& g) const override { require_dims(name_, g, kind_); }
  std::size_t n_coeff(const Geometry&) const override { return tri_.size() * (quantity_ == "both" ? 2 : 1); }

  std::vector<Axis> axes(const Geometry& g) const override {
    check(g);
    auto t = table(g);
    std::vector<std::int64_t> q, n;
    std::vector<double> k1, k2, k3, ang;
    for (int which = 0; which < 2; ++which) {
      if ((which == 0 && quantity_ == "normalised") || (which == 1 && quantity_ == "bispectrum")) continue;
      for (std::size_t i = 0; i < tri_.size(); ++i) {
        q.push_back(which);
        k1.push_back(tri_[i].k1);
        k2.push_back(tri_[i].k2);
        k3.push_back(tri_[i].k3);
        ang.push_back(tri_[i].angle_deg);
        n.push_back(static_cast<std::int64_t>(std::llround(t->n_tri[i])));
      }
    }
    return {{"quantity", q}, {"k1", k1}, {"k2", k2}, {"k3", k3}, {"angle_deg", ang}, {"n_triangles", n}};
  }

  std::vector<double> measure(const float* data, const Geometry& g) const override { return estimate(data, g, nullptr); }

  std::vector<double> measure_kept(const float* data, const Geometry& g, const KeptModes& kept) const override {
    if (kept.all()) return measure(data, g);  // the clean path, byte for byte
    const KeptView view(kept, g);
    return estimate(data, g, &view);
  }

  std::vector<Axis> axes_kept(const Geometry& g, const KeptModes& kept) const override {
    if (kept.all()) return axes(g);
    check(g);
    const KeptView view(kept, g);
    const auto n_tri = closed_triangles(dims_of(g), *table(g), &view);
    auto ax = axes(g);
    for (auto& a : ax)
      if (a.name == "n_triangles") {
        auto& v = std::get<std::vector<std::int64_t>>(a.values);
        for (std::size_t c = 0; c < v.size(); ++c) v[c] = std::llround(n_tri[c % tri_.size()]);
      }
    return ax;
  }

 private:
  /// B and its normalised form; with `view`, shells hold kept modes only (a kept mode
  /// weighs its taper weight in the unit field, so the normaliser counts what was kept).
  std::vector<double> estimate(const float* data, const Geometry& g, const KeptView* view) const {
    check(g);
    auto t = table(g);
    const std::vector<double> kept_tri = view ? closed_triangles(dims_of(g), *t, view) : std::vector<double>{};
    const std::vector<double>& n_tri = view ? kept_tri : t->n_tri;
    const Dims d = dims_of(g);
    fft::Buffer<cf> f(d.n_half());
    fft::Buffer<float> copy;
    forward(d, aligned(data, d.n_real(), copy), f.data());
    double dv = 1.0;
    for (std::size_t a = 0; a < g.shape.size(); ++a) dv *= g.cell(a);
    const double n = static_cast<double>(d.n_real()), volume = n * dv;

    ShellFields fields;
    std::vector<double> b(tri_.size()), qn(tri_.size());
    const double nan = std::numeric_limits<double>::quiet_NaN();
    for (std::size_t i = 0; i < tri_.size(); ++i) {
      const double ks[3] = {tri_[i].k1, tri_[i].k2, tri_[i].k3};
      const float* r[3];
      double p[3];
      for (int s = 0; s < 3; ++s) {
        const auto& sf =
            fields.get(ks[s], ks, [&](std::vector<float>& out) { return shell(d, *t, f, ks[s], out, view); });
        r[s] = sf.field.data();
        p[s] = sf.modes > 0 ? sf.power_sum * dv / n / sf.norm : nan;  // shell mean of P̂ = ΔV |F|² / N
      }
      double sum = 0.0;
      for (std::size_t x = 0; x < d.n_real(); ++x)
        sum += static_cast<double>(r[0][x]) * static_cast<double>(r[1][x]) * static_cast<double>(r[2][x]);
      // Σ R1R2R3 = N Σ_closed F1F2F3 (R = unnormalised c2r); δ̃ = ΔV F.
      b[i] = n_tri[i] > 0.5 ? sum / n * dv * dv * dv / n_tri[i] / volume : nan;
      const double denom = p[0] * p[1] + p[1] * p[2] + p[2] * p[0];
      qn[i] = b[i] / denom;
    }
    std::vector<double> out;
    if (quantity_ != "normalised") out.insert(out.end(), b.begin(), b.end());
    if (quantity_ != "bispectrum") out.insert(out.end(), qn.begin(), qn.end());
    return out;
  }


 public:
  Attributes attributes() const override {
    std::vector<double> k1, k2, ang;
    for (auto& t : tri_) k1.push_back(t.k1), k2.push_back(t.k2), ang.push_back(t.angle_deg);
    return {{"kernel", std::string("FFT shell-estimator bispectrum")},
            {"k1_mpc", k1},
            {"k2_mpc", k2},
            {"angle_deg", ang},
            {"shell_fraction", fraction_},
            {"quantity", quantity_},
            {"quantity_names", std::vector<std::string>{"bispectrum", "normalised"}},
            {"bispectrum_unit", std::string(kind_ == UnitKind::chunk ? "mK^3 Mpc^6" : "mK^3 Mpc^4")},
            {"normalised_unit", std::string("1/mK")}};
  }

 private:
  struct ShellField {
    double k = -1.0, modes = 0.0, power_sum = 0.0, norm = 0.0;
    std::vector<float> field;
  };
  /// The last three shell fields, so triangles sharing a shell transform it once.
  /// A miss evicts a slot the current triangle does not use (it needs at most three).
  struct ShellFields {
    ShellField slot[3];
    template <class Make>
    const ShellField& get(double k, const double (&pinned)[3], Make&& make) {
      for (auto& s : slot)
        if (s.k == k) return s;
      ShellField* victim = &slot[0];
      for (auto& s : slot)
        if (s.k != pinned[0] && s.k != pinned[1] && s.k != pinned[2]) victim = &s;
      victim->k = k;
      const auto [modes, power, norm] = make(victim->field);
      victim->modes = modes;
      victim->power_sum = power;
      victim->norm = norm;
      return *victim;
    }
  };

  static void forward(const Dims& d, const float* data, cf* out) {
    if (d.two_d)
      fft::r2c_2d(d.n1, d.n2, data, out);
    else
      fft::r2c_3d({d.n0, d.n1, d.n2}, data, out);
  }
  static void inverse(const Dims& d, cf* in, float* out) {
    if (d.two_d)
      fft::c2r_2d(d.n1, d.n2, in, out);
    else
      fft::c2r_3d({d.n0, d.n1, d.n2}, in, out);
  }

  bool in_shell(float kk, double k) const { return kk > 0.0f && std::abs(kk - k) < 0.5 * fraction_ * k; }

  /// Unnormalised c2r of F (or of 1 when f is empty) on shell k, kept modes only when
  /// `view` is given (the unit field is then the taper weight); returns (full-grid modes,
  /// Σ w|F|², Σ w·weight²: the normaliser of the shell-averaged power).
  std::tuple<double, double, double> shell(const Dims& d, const Table& t, const fft::Buffer<cf>& f, double k,
                                           std::vector<float>& out, const KeptView* view = nullptr) const {
    fft::Buffer<cf> work(d.n_half());
    double modes = 0.0, power = 0.0, norm = 0.0;
    std::size_t idx = 0;
    for (std::size_t ij = 0; ij < d.n0 * d.n1; ++ij)
      for (std::size_t l = 0; l < d.h2; ++l, ++idx) {
        if (in_shell(t.k[idx], k) && (!view || view->keeps(ij, l))) {
          const double w2 = view ? view->weight2(ij, l) : 1.0;
          const cf v = f.size() ? f[idx] : cf(static_cast<float>(std::sqrt(w2)), 0.0f);
          work[idx] = v;
          const double w = half_plane_weight(l, d.n2);
          modes += w;
          norm += w * w2;
          power += w * std::norm(std::complex<double>(v));
        } else {
          work[idx] = cf(0.0f, 0.0f);
        }
      }
    out.resize(d.n_real());
    fft::Buffer<float> real(d.n_real());
    inverse(d, work.data(), real.data());
    std::copy(real.data(), real.data() + d.n_real(), out.begin());
    return {modes, power, norm};
  }

  /// Σ_x J1 J2 J3 / N per triangle: the closed triangles of unit fields on the shells.
  std::vector<double> closed_triangles(const Dims& d, const Table& t, const KeptView* view) const {
    const fft::Buffer<cf> unit;  // empty: the unit field
    ShellFields fields;
    std::vector<double> out;
    for (const auto& tr : tri_) {
      const double ks[3] = {tr.k1, tr.k2, tr.k3};
      const float* r[3];
      for (int s = 0; s < 3; ++s)
        r[s] = fields.get(ks[s], ks, [&](std::vector<float>& o) { return shell(d, t, unit, ks[s], o, view); })
                   .field.data();
      double sum = 0.0;
      for (std::size_t x = 0; x < d.n_real(); ++x)
        sum += static_cast<double>(r[0][x]) * static_cast<double>(r[1][x]) * static_cast<double>(r[2][x]);
      out.push_back(sum / static_cast<double>(d.n_real()));
    }
    return out;
  }

  std::shared_ptr<const Table> table(const Geometry& g) const {
    return cache_.get(GeomKey{g.shape, g.cell_mpc}, [&] {
      const Dims d = dims_of(g);
      Table t;
      t.k = mode_k(d);
      t.n_tri = closed_triangles(d, t, nullptr);
      return t;
    });
  }

  std::string name_;
  UnitKind kind_;
  std::vector<Triangle> tri_;
  double fraction_;
  std::string quantity_;
  TableCache<GeomKey, Table> cache_;
};

}  // namespace

std::unique_ptr<Kernel> make_bispectrum(const core::Config& c, const std::string& t, UnitKind kind) {
  auto k1 = c.reals(t + ".k1_mpc"), k2 = c.reals(t + ".k2_mpc"), ang = c.reals(t + ".angle_deg");
  const std::size_t n = std::max({k1.size(), k2.size(), ang.size()});
  for (auto [v, key] : {std::pair{&k1, "k1_mpc"}, std::pair{&k2, "k2_mpc"}, std::pair{&ang, "angle_deg"}}) {
    if (v->empty()) c.fail(t + "." + key, "needs at least one value");
    if (v->size() != n && v->size() != 1)
      c.fail(t + "." + key, "has " + std::to_string(v->size()) + " values; k1_mpc, k2_mpc and angle_deg need equal "
                            "lengths (or length 1, repeated), longest is " + std::to_string(n));
  }
  std::vector<Triangle> tri;
  for (std::size_t i = 0; i < n; ++i) {
    const double a = k1[k1.size() == 1 ? 0 : i], b = k2[k2.size() == 1 ? 0 : i], th = ang[ang.size() == 1 ? 0 : i];
    const double k3 = std::sqrt(std::max(0.0, a * a + b * b + 2.0 * a * b * std::cos(th * M_PI / 180.0)));
    if (k3 < 1e-12 * std::max(a, b))
      c.fail(t + ".angle_deg", "triangle " + std::to_string(i) + " has k3 = |k1 + k2| = 0 (k1 = k2 at 180°); "
                               "the k = 0 mode is excluded");
    tri.push_back({a, b, th, k3});
  }
  return std::make_unique<BispectrumKernel>(t.substr(t.find('.') + 1), kind, std::move(tri),
                                            c.real(t + ".shell_fraction"), c.string(t + ".quantity"));
}

}  // namespace spinflip::stats::detail
