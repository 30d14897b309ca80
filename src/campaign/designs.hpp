// Design generators: unit-cube point sets (Latin hypercube, Sobol, grid) and
// the [[designs]] blocks that turn them into physical design points.
// Methods and their sources: docs/campaign.md.
#pragma once
#include <cstddef>
#include <string>
#include <vector>

#include "campaign/campaign.hpp"
#include "core/config.hpp"
#include "core/rng.hpp"

namespace spinflip::campaign {

/// n points in [0,1)^d, row-major (point i, dimension j at [i*d + j]).
using UnitPoints = std::vector<double>;

/// Latin hypercube (McKay, Beckman & Conover 1979): exactly one point in each of the
/// n strata of every dimension. scramble: uniform position inside the stratum;
/// otherwise the stratum centre. Permutations and positions come from `rng`.
UnitPoints latin_hypercube(std::size_t n, std::size_t d, bool scramble, const rng::CounterRng& rng);

/// Largest dimension the Sobol generator has direction numbers for.
std::size_t sobol_max_dimension();
/// The first n points of the Sobol sequence in Gray-code order with Joe & Kuo (2008)
/// direction numbers (first point 0). scramble: a random lower-triangular binary
/// matrix per dimension (linear matrix scramble, Matoušek 1998) and a random
/// digital shift, drawn from `rng`. ConfigError-free: d must be ≤ sobol_max_dimension().
UnitPoints sobol(std::size_t n, std::size_t d, bool scramble, const rng::CounterRng& rng);

/// Map a unit coordinate to the parameter's range (uniform in log10 when log).
double to_physical(const Parameter& p, double unit);

/// What one [[designs]] block contributes.
struct DesignBlock {
  std::string kind, name;
  std::size_t realisations = 1;
  std::vector<DesignPoint> points;
};

/// Build block `index` of config's [[designs]]. `fiducial_point` is the global index
/// of the fiducial design's point (-1 if none yet) and `first_point` the global index
/// the block's first point will have. ConfigError naming designs.<index>.<key> (or the
/// CSV file:line) on any problem.
DesignBlock build_design(const core::Config& config, std::size_t index, const std::vector<Parameter>& parameters,
                         std::int64_t fiducial_point, std::size_t first_point);

}  // namespace spinflip::campaign
