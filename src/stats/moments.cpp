// One-point statistics: mean, variance (ddof 0), skewness m3/m2^1.5 and EXCESS
// kurtosis m4/m2² − 3 (the biased sample estimators; scipy.stats.skew and
// scipy.stats.kurtosis with their defaults bias=True, fisher=True), and an
// optional histogram as the fraction of cells per bin.
#include <algorithm>
#include <limits>

#include "stats/internal.hpp"

namespace spinflip::stats::detail {
namespace {

class MomentsKernel final : public Kernel {
 public:
  MomentsKernel(std::string name, UnitKind kind, std::vector<double> edges)
      : name_(std::move(name)), kind_(kind), edges_(std::move(edges)) {}

  const std::string& name() const override { return name_; }
  UnitKind unit_kind() const override { return kind_; }
  void check(const Geometry& g) const override { require_dims(name_, g, kind_); }
  std::size_t n_coeff(const Geometry&) const override { return 4 + bins(); }

  std::vector<Axis> axes(const Geometry& g) const override {
    const double nan = std::numeric_limits<double>::quiet_NaN();
    std::vector<std::int64_t> q;
    std::vector<double> lo, hi;
    for (int i = 0; i < 4; ++i) {
      q.push_back(i);
      lo.push_back(nan);
      hi.push_back(nan);
    }
    for (std::size_t b = 0; b < bins(); ++b) {
      q.push_back(4);
      lo.push_back(edges_[b]);
      hi.push_back(edges_[b + 1]);
    }
    (void)g;
    return {{"quantity", q}, {"bin_lo", lo}, {"bin_hi", hi}};
  }

  std::vector<double> measure(const float* data, const Geometry& g) const override {
    check(g);
    const std::size_t n = g.n_cells();
    double mean = 0.0;
    for (std::size_t i = 0; i < n; ++i) mean += data[i];
    mean /= static_cast<double>(n);
    double m2 = 0.0, m3 = 0.0, m4 = 0.0;  // central moments, two-pass for accuracy
    for (std::size_t i = 0; i < n; ++i) {
      const double d = data[i] - mean, d2 = d * d;
      m2 += d2;
      m3 += d2 * d;
      m4 += d2 * d2;
    }
    m2 /= static_cast<double>(n);
    m3 /= static_cast<double>(n);
    m4 /= static_cast<double>(n);
    const double nan = std::numeric_limits<double>::quiet_NaN();
    std::vector<double> out{mean, m2, m2 > 0 ? m3 / std::pow(m2, 1.5) : nan, m2 > 0 ? m4 / (m2 * m2) - 3.0 : nan};
    if (bins() > 0) {
      std::vector<double> h(bins(), 0.0);
      for (std::size_t i = 0; i < n; ++i) {
        const double v = data[i];
        if (v < edges_.front() || v > edges_.back()) continue;
        // [lo, hi) except the last bin, which includes its upper edge (numpy.histogram's rule).
        auto b = static_cast<std::size_t>(std::upper_bound(edges_.begin(), edges_.end(), v) - edges_.begin());
        b = std::min(b, bins()) - 1;
        h[b] += 1.0;
      }
      for (auto& x : h) out.push_back(x / static_cast<double>(n));
    }
    return out;
  }

  Attributes attributes() const override {
    // One name per quantity value the coefficients carry: the histogram's only when it has bins.
    std::vector<std::string> names{"mean", "variance", "skewness", "excess_kurtosis"};
    if (bins() > 0) names.push_back("histogram_fraction");
    return {{"kernel", std::string("one-point moments")},
            {"quantity_names", names},
            {"histogram_edges", edges_},
            {"kurtosis_convention", std::string("excess (m4/m2^2 - 3), biased estimators")}};
  }

 private:
  std::size_t bins() const { return edges_.empty() ? 0 : edges_.size() - 1; }
  std::string name_;
  UnitKind kind_;
  std::vector<double> edges_;
};

}  // namespace

std::unique_ptr<Kernel> make_moments(const core::Config& c, const std::string& t, UnitKind kind) {
  auto edges = c.reals(t + ".histogram_edges");
  if (edges.size() == 1) c.fail(t + ".histogram_edges", "needs at least two edges (or none for no histogram)");
  for (std::size_t i = 1; i < edges.size(); ++i)
    if (!(edges[i] > edges[i - 1])) c.fail(t + ".histogram_edges", "edges must increase strictly");
  return std::make_unique<MomentsKernel>(t.substr(t.find('.') + 1), kind, std::move(edges));
}

}  // namespace spinflip::stats::detail
