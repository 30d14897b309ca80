// Pure estimators on data matrices (rows = realisations), testable alone.
#pragma once
#include <Eigen/Dense>

#include <cstdint>
#include <string>
#include <vector>

namespace spinflip::analysis {

/// Sample mean and unbiased (1/(n−1)) covariance of the rows of X.
struct MeanCov {
  Eigen::VectorXd mean;
  Eigen::MatrixXd cov;
};
MeanCov mean_cov(const Eigen::MatrixXd& X);

/// Hartlap, Simon & Schneider (2007) eq. 17 factor (n − p − 2)/(n − 1) that
/// de-biases the inverse of a sample covariance from n realisations of p numbers.
double hartlap_factor(std::size_t n, std::size_t p);

/// Ledoit & Wolf (2004, J. Multivar. Anal. 88, 365) shrinkage towards μI,
/// with their 1/n sample covariance and normalised Frobenius norm.
struct Shrunk {
  Eigen::MatrixXd cov;
  double intensity = 0;  // b²/d², in [0, 1]
  double target_scale = 0;  // μ = tr(S)/p
};
Shrunk ledoit_wolf(const Eigen::MatrixXd& X);

Eigen::MatrixXd correlation(const Eigen::MatrixXd& cov);
/// λ_max/λ_min of a symmetric matrix (inf when λ_min ≤ 0).
double condition_number(const Eigen::MatrixXd& cov);

/// Inverse of a symmetric positive-definite matrix; InputError naming `what` if not.
Eigen::MatrixXd spd_inverse(const Eigen::MatrixXd& m, const std::string& what);

/// F = Dᵀ P D for derivatives D (n_data × n_params) and precision P.
Eigen::MatrixXd fisher_matrix(const Eigen::MatrixXd& D, const Eigen::MatrixXd& precision);
/// Marginalised √(F⁻¹)ᵢᵢ and conditional 1/√Fᵢᵢ errors.
Eigen::VectorXd marginal_errors(const Eigen::MatrixXd& F);
Eigen::VectorXd conditional_errors(const Eigen::MatrixXd& F);
/// Matrix geometric mean A # B = A½ (A−½ B A−½)½ A½ of two SPD matrices.
Eigen::MatrixXd geometric_mean(const Eigen::MatrixXd& A, const Eigen::MatrixXd& B);

/// Unit-cube scaling of physical parameters (log10 space where log[i]).
double to_unit(double value, double lo, double hi, bool log);
double from_unit(double u, double lo, double hi, bool log);

/// Deterministic assignment of design points to splits 0 (train), 1
/// (validation), 2 (test): a seeded shuffle of the distinct points, cut by
/// the fractions. The same (points, fractions, seed) give the same answer everywhere.
std::vector<int> split_points(const std::vector<std::int64_t>& distinct_points,
                              const std::vector<double>& fractions, std::uint64_t seed);

}  // namespace spinflip::analysis
