#include "analysis/estimators.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>

#include "core/errors.hpp"

namespace spinflip::analysis {

MeanCov mean_cov(const Eigen::MatrixXd& X) {
  const auto n = X.rows();
  if (n < 2) throw InputError("a covariance needs at least 2 realisations, got " + std::to_string(n));
  MeanCov out;
  out.mean = X.colwise().mean().transpose();
  const Eigen::MatrixXd Y = X.rowwise() - out.mean.transpose();
  out.cov = (Y.transpose() * Y) / static_cast<double>(n - 1);
  return out;
}

double hartlap_factor(std::size_t n, std::size_t p) {
  return (static_cast<double>(n) - static_cast<double>(p) - 2.0) / (static_cast<double>(n) - 1.0);
}

Shrunk ledoit_wolf(const Eigen::MatrixXd& X) {
  const auto n = static_cast<double>(X.rows());
  const auto p = static_cast<double>(X.cols());
  if (X.rows() < 2) throw InputError("Ledoit-Wolf shrinkage needs at least 2 realisations");
  const Eigen::MatrixXd Y = X.rowwise() - X.colwise().mean();
  const Eigen::MatrixXd S = (Y.transpose() * Y) / n;  // their eq. uses 1/n
  // ‖A‖² = tr(A Aᵀ)/p, the paper's normalised Frobenius norm (Definition 1).
  const double m = S.trace() / p;
  Eigen::MatrixXd diff = S;
  diff.diagonal().array() -= m;
  const double d2 = diff.squaredNorm() / p;
  const double s2 = S.squaredNorm();
  double bbar2 = 0;
  for (Eigen::Index k = 0; k < Y.rows(); ++k) {
    const Eigen::VectorXd y = Y.row(k).transpose();
    const double yy = y.squaredNorm();
    // ‖y yᵀ − S‖² expanded so no p×p temporary per realisation.
    bbar2 += (yy * yy - 2.0 * y.dot(S * y) + s2) / p;
  }
  bbar2 /= n * n;
  const double b2 = std::min(bbar2, d2);
  Shrunk out;
  out.intensity = d2 > 0 ? b2 / d2 : 1.0;
  out.target_scale = m;
  out.cov = (1.0 - out.intensity) * S;
  out.cov.diagonal().array() += out.intensity * m;
  return out;
}

Eigen::MatrixXd correlation(const Eigen::MatrixXd& cov) {
  const Eigen::VectorXd inv_sd = cov.diagonal().array().sqrt().inverse();
  return inv_sd.asDiagonal() * cov * inv_sd.asDiagonal();
}

double condition_number(const Eigen::MatrixXd& cov) {
  Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> es(cov, Eigen::EigenvaluesOnly);
  const double lo = es.eigenvalues().minCoeff(), hi = es.eigenvalues().maxCoeff();
  return lo > 0 ? hi / lo : std::numeric_limits<double>::infinity();
}

Eigen::MatrixXd spd_inverse(const Eigen::MatrixXd& m, const std::string& what) {
  Eigen::LLT<Eigen::MatrixXd> llt(m);
  if (llt.info() != Eigen::Success)
    throw InputError(what + " is not positive definite (condition number " +
                     std::to_string(condition_number(m)) + "); select fewer or less degenerate coefficients");
  const Eigen::MatrixXd inv = llt.solve(Eigen::MatrixXd::Identity(m.rows(), m.cols()));
  return 0.5 * (inv + inv.transpose());
}

Eigen::MatrixXd fisher_matrix(const Eigen::MatrixXd& D, const Eigen::MatrixXd& precision) {
  const Eigen::MatrixXd F = D.transpose() * precision * D;
  return 0.5 * (F + F.transpose());
}

Eigen::VectorXd marginal_errors(const Eigen::MatrixXd& F) {
  return spd_inverse(F, "the Fisher matrix").diagonal().array().sqrt();
}

Eigen::VectorXd conditional_errors(const Eigen::MatrixXd& F) { return F.diagonal().array().rsqrt(); }

namespace {
Eigen::MatrixXd spd_power(const Eigen::MatrixXd& A, double power) {
  Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> es(A);
  if (es.eigenvalues().minCoeff() <= 0) throw InputError("a Fisher estimate is not positive definite");
  return es.eigenvectors() * es.eigenvalues().array().pow(power).matrix().asDiagonal() *
         es.eigenvectors().transpose();
}
}  // namespace

Eigen::MatrixXd geometric_mean(const Eigen::MatrixXd& A, const Eigen::MatrixXd& B) {
  const Eigen::MatrixXd h = spd_power(A, 0.5), ih = spd_power(A, -0.5);
  Eigen::MatrixXd inner = ih * B * ih;
  inner = 0.5 * (inner + inner.transpose());
  const Eigen::MatrixXd G = h * spd_power(inner, 0.5) * h;
  return 0.5 * (G + G.transpose());
}

double to_unit(double value, double lo, double hi, bool log) {
  if (log) return (std::log10(value) - std::log10(lo)) / (std::log10(hi) - std::log10(lo));
  return (value - lo) / (hi - lo);
}

double from_unit(double u, double lo, double hi, bool log) {
  if (log) return std::pow(10.0, std::log10(lo) + u * (std::log10(hi) - std::log10(lo)));
  return lo + u * (hi - lo);
}

namespace {
// splitmix64 (Steele, Lea & Flood 2014): fully specified, so a split is the
// same on every platform (std::shuffle's algorithm is not).
std::uint64_t splitmix64(std::uint64_t& state) {
  std::uint64_t z = (state += 0x9E3779B97F4A7C15ULL);
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
  return z ^ (z >> 31);
}
}  // namespace

std::vector<int> split_points(const std::vector<std::int64_t>& distinct_points,
                              const std::vector<double>& fractions, std::uint64_t seed) {
  const std::size_t n = distinct_points.size();
  std::vector<std::size_t> order(n);
  std::iota(order.begin(), order.end(), 0);
  // Shuffle positions in the sorted list of points, so the caller's order does not matter.
  std::sort(order.begin(), order.end(), [&](auto a, auto b) { return distinct_points[a] < distinct_points[b]; });
  std::uint64_t state = seed;
  for (std::size_t i = n; i > 1; --i) {
    const std::size_t j = static_cast<std::size_t>(splitmix64(state) % i);
    std::swap(order[i - 1], order[j]);
  }
  const double total = std::accumulate(fractions.begin(), fractions.end(), 0.0);
  const auto n_train = static_cast<std::size_t>(std::llround(fractions.at(0) / total * static_cast<double>(n)));
  const auto n_val = static_cast<std::size_t>(std::llround(fractions.at(1) / total * static_cast<double>(n)));
  std::vector<int> split(n, 2);
  for (std::size_t k = 0; k < n; ++k) split[order[k]] = k < n_train ? 0 : k < n_train + n_val ? 1 : 2;
  return split;
}

}  // namespace spinflip::analysis
