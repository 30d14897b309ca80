#include "campaign/schema.hpp"

namespace spinflip::campaign {

using core::KeySpec;
using core::ValueType;

void declare_keys(core::Schema& s) {
  s.add_table("campaign", "What the campaign is called, its seed and where its catalogue goes.");
  s.add({.path = "campaign.name", .type = ValueType::string, .default_value = std::string("campaign"),
         .doc = "name shown in logs and stored in the catalogue"});
  s.add({.path = "campaign.seed", .type = ValueType::integer, .default_value = std::int64_t{1}, .min = 0,
         .doc = "campaign seed: every random number derives from it, the point and the realisation"});
  s.add({.path = "campaign.output", .type = ValueType::string, .default_value = std::string("catalogue.h5"),
         .doc = "catalogue path, relative to the working directory unless absolute"});
  s.add({.path = "campaign.group_size", .type = ValueType::integer, .default_value = std::int64_t{1}, .min = 1,
         .doc = "ranks that share one light cone through FFTW-MPI slabs"});
  s.add({.path = "campaign.memory_limit_gb", .type = ValueType::real, .default_value = 0.0, .unit = "GB",
         .min = 0.0, .doc = "refuse to run when the per-rank estimate exceeds this (0: the node's memory per rank)"});
  s.add({.path = "campaign.progress_interval_s", .type = ValueType::real, .default_value = 10.0, .unit = "s",
         .min = 0.1, .doc = "how often rank 0 logs progress and rewrites the progress file"});

  s.add_table("parameters.*",
              "A varied astrophysical or cosmological parameter; the table name is the key it varies "
              "(any key marked 'can vary').");
  s.add({.path = "parameters.*.min", .type = ValueType::real, .doc = "lower bound of the design range"});
  s.add({.path = "parameters.*.max", .type = ValueType::real, .doc = "upper bound of the design range"});
  s.add({.path = "parameters.*.fiducial", .type = ValueType::real,
         .doc = "fiducial value (covariance realisations and stencil centre)"});
  s.add({.path = "parameters.*.log", .type = ValueType::boolean, .default_value = false,
         .doc = "sample the design uniformly in log10 of the parameter"});
  s.add({.path = "parameters.*.step", .type = ValueType::real, .default_value = 0.05, .min = 0.0,
         .min_exclusive = true, .doc = "stencil half-step: a fraction of the fiducial, or absolute if step_absolute"});
  s.add({.path = "parameters.*.step_absolute", .type = ValueType::boolean, .default_value = false,
         .doc = "treat step as an absolute offset in the parameter's unit"});
  s.add({.path = "parameters.*.label", .type = ValueType::string, .default_value = std::string(""),
         .doc = "axis label for plots (defaults to the parameter name)"});
}

const core::Schema& campaign_schema() {
  static const core::Schema schema = [] {
    core::Schema s;
    declare_keys(s);
    return s;
  }();
  return schema;
}

}  // namespace spinflip::campaign
