// The pure estimators against published formulas and worked examples.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <random>

#include "analysis/estimators.hpp"
#include "core/errors.hpp"

using namespace spinflip::analysis;

TEST(AnalysisHartlap, FactorIsPaperFormula) {
  // Hartlap, Simon & Schneider (2007) eq. 17: (n − p − 2)/(n − 1).
  EXPECT_DOUBLE_EQ(hartlap_factor(100, 10), 88.0 / 99.0);
  EXPECT_DOUBLE_EQ(hartlap_factor(13, 10), 1.0 / 12.0);
  EXPECT_LE(hartlap_factor(12, 10), 0.0);  // n = p + 2: no unbiased inverse exists
}

TEST(AnalysisMeanCov, WorkedExample) {
  // Rows (1,2), (3,6), (5,7): means 3, 5; unbiased variances 4 and 7, covariance 5
  // (hand calculation: deviations (−2,−3), (0,1), (2,2)).
  Eigen::MatrixXd X(3, 2);
  X << 1, 2, 3, 6, 5, 7;
  const auto mc = mean_cov(X);
  EXPECT_DOUBLE_EQ(mc.mean[0], 3.0);
  EXPECT_DOUBLE_EQ(mc.mean[1], 5.0);
  EXPECT_DOUBLE_EQ(mc.cov(0, 0), 4.0);
  EXPECT_DOUBLE_EQ(mc.cov(1, 1), 7.0);
  EXPECT_DOUBLE_EQ(mc.cov(0, 1), 5.0);
  EXPECT_THROW(mean_cov(X.topRows(1)), spinflip::InputError);
}

TEST(AnalysisLedoitWolf, IntensityInRangeAndTracePreserved) {
  // Ledoit & Wolf (2004) Theorem 3.1: S* = (b²/d²) m I + (a²/d²) S with
  // a² + b² = d², so 0 ≤ b²/d² ≤ 1 and tr S* = tr S (m = tr S / p).
  std::mt19937_64 gen(3);
  std::normal_distribution<double> g;
  Eigen::MatrixXd X(30, 12);
  for (Eigen::Index i = 0; i < X.rows(); ++i)
    for (Eigen::Index j = 0; j < X.cols(); ++j) X(i, j) = g(gen) * (1.0 + 0.2 * static_cast<double>(j));
  const auto lw = ledoit_wolf(X);
  EXPECT_GE(lw.intensity, 0.0);
  EXPECT_LE(lw.intensity, 1.0);
  const Eigen::MatrixXd Y = X.rowwise() - X.colwise().mean();
  const double trS = (Y.transpose() * Y).trace() / 30.0;
  EXPECT_NEAR(lw.cov.trace(), trS, 1e-10 * trS);  // rounding only
  EXPECT_LT(condition_number(lw.cov), condition_number(mean_cov(X).cov));
}

TEST(AnalysisFisher, LinearGaussianWorkedExample) {
  // J = [[1,0],[0,2],[1,1]], C = diag(1,4,2): F = Jᵀ C⁻¹ J = [[1.5,0.5],[0.5,1.5]]
  // (hand calculation), F⁻¹ = [[0.75,−0.25],[−0.25,0.75]].
  Eigen::MatrixXd J(3, 2);
  J << 1, 0, 0, 2, 1, 1;
  const Eigen::MatrixXd C = Eigen::Vector3d(1, 4, 2).asDiagonal();
  const Eigen::MatrixXd F = fisher_matrix(J, spd_inverse(C, "C"));
  EXPECT_NEAR(F(0, 0), 1.5, 1e-14);
  EXPECT_NEAR(F(0, 1), 0.5, 1e-14);
  EXPECT_NEAR(F(1, 1), 1.5, 1e-14);
  EXPECT_NEAR(marginal_errors(F)[0], std::sqrt(0.75), 1e-14);
  EXPECT_NEAR(conditional_errors(F)[1], 1 / std::sqrt(1.5), 1e-14);
}

TEST(AnalysisFisher, RefusesNonPositiveDefinite) {
  Eigen::MatrixXd C(2, 2);
  C << 1, 1, 1, 1;
  EXPECT_THROW(spd_inverse(C, "C"), spinflip::InputError);
}

TEST(AnalysisGeometricMean, SolvesRiccatiEquation) {
  // The matrix geometric mean G = A # B is the SPD solution of G A⁻¹ G = B
  // (Bhatia 2007, Positive Definite Matrices, §4.1); for commuting diagonal
  // matrices it is the elementwise √(ab).
  Eigen::MatrixXd A(2, 2), B(2, 2);
  A << 2, 0.5, 0.5, 1;
  B << 3, -0.4, -0.4, 0.8;
  const Eigen::MatrixXd G = geometric_mean(A, B);
  EXPECT_LT((G * A.inverse() * G - B).norm(), 1e-12);
  const Eigen::MatrixXd D = geometric_mean(Eigen::Vector2d(4, 9).asDiagonal(), Eigen::Vector2d(1, 4).asDiagonal());
  EXPECT_NEAR(D(0, 0), 2.0, 1e-14);
  EXPECT_NEAR(D(1, 1), 6.0, 1e-14);
}

TEST(AnalysisUnitCube, RoundTripsLinearAndLog) {
  for (double v : {10.0, 17.5, 50.0}) EXPECT_NEAR(from_unit(to_unit(v, 10, 50, false), 10, 50, false), v, 1e-12);
  for (double v : {1e38, 3.3e39, 1e42}) EXPECT_NEAR(from_unit(to_unit(v, 1e38, 1e42, true), 1e38, 1e42, true) / v, 1, 1e-13);
  EXPECT_DOUBLE_EQ(to_unit(1e40, 1e38, 1e42, true), 0.5);  // log10 midpoint
  EXPECT_DOUBLE_EQ(to_unit(30, 10, 50, false), 0.5);
}

TEST(AnalysisSplit, DeterministicOrderFreeAndSized) {
  std::vector<std::int64_t> pts;
  for (std::int64_t i = 0; i < 50; ++i) pts.push_back(3 * i + 1);
  const auto a = split_points(pts, {0.8, 0.1, 0.1}, 42);
  auto rev = pts;
  std::reverse(rev.begin(), rev.end());
  const auto b = split_points(rev, {0.8, 0.1, 0.1}, 42);
  for (std::size_t i = 0; i < pts.size(); ++i) EXPECT_EQ(a[i], b[pts.size() - 1 - i]);  // input order irrelevant
  EXPECT_EQ(std::count(a.begin(), a.end(), 0), 40);
  EXPECT_EQ(std::count(a.begin(), a.end(), 1), 5);
  EXPECT_EQ(std::count(a.begin(), a.end(), 2), 5);
  EXPECT_NE(a, split_points(pts, {0.8, 0.1, 0.1}, 43));
}
