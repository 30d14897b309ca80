#include "campaign/schema.hpp"

#include "fft/planning.hpp"

#ifdef SPINFLIP_HAVE_COSMO
#include "cosmo/cosmology.hpp"
#endif
#ifdef SPINFLIP_HAVE_SIM
#include "sim/lightcone.hpp"
#endif
#ifdef SPINFLIP_HAVE_INSTRUMENT
#include "instrument/instrument.hpp"
#endif
#ifdef SPINFLIP_HAVE_STATS
#include "stats/stats.hpp"
#endif
#ifdef SPINFLIP_HAVE_INGEST
#include "ingest/ingest.hpp"
#endif

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
              "A varied astrophysical or cosmological parameter; the table name is the leaf name of the key "
              "it varies (any key marked 'can vary', e.g. [parameters.ionizing_efficiency]).");
  s.add({.path = "parameters.*.min", .type = ValueType::real, .doc = "lower bound of the design range"});
  s.add({.path = "parameters.*.max", .type = ValueType::real, .doc = "upper bound of the design range"});
  s.add({.path = "parameters.*.fiducial", .type = ValueType::real,
         .doc = "fiducial value (covariance realisations and stencil centre)"});
  s.add({.path = "parameters.*.log", .type = ValueType::boolean, .default_value = false,
         .doc = "sample the design uniformly in log10 of the parameter (needs min > 0)"});
  s.add({.path = "parameters.*.step", .type = ValueType::real, .default_value = 0.05, .min = 0.0,
         .min_exclusive = true, .doc = "stencil half-step: a fraction of the fiducial, or absolute if step_absolute"});
  s.add({.path = "parameters.*.step_absolute", .type = ValueType::boolean, .default_value = false,
         .doc = "treat step as an absolute offset in the parameter's unit"});
  s.add({.path = "parameters.*.label", .type = ValueType::string, .default_value = std::string(""),
         .doc = "axis label for plots (defaults to the parameter name)"});

  // [[designs]]: an array of tables; `*` is the block's index (designs.0.kind).
  s.add_table("designs.*", "One block of design points ([[designs]], any number, in order): a training design "
                           "(latin_hypercube, sobol, grid), a fiducial point, a derivative stencil or a CSV list.");
  s.add({.path = "designs.*.kind", .type = ValueType::string,
         .choices = {"latin_hypercube", "sobol", "grid", "fiducial", "stencil", "list"},
         .doc = "what the block makes (see docs/campaign.md)"});
  s.add({.path = "designs.*.name", .type = ValueType::string, .default_value = std::string(""),
         .doc = "label shown by plan and status (defaults to the kind)"});
  s.add({.path = "designs.*.points", .type = ValueType::integer, .default_value = std::int64_t{0}, .min = 0,
         .max = 1e8, .doc = "number of points (latin_hypercube, sobol; required there)"});
  s.add({.path = "designs.*.realisations", .type = ValueType::integer, .default_value = std::int64_t{1}, .min = 1,
         .max = 1e6, .doc = "realisations (independent seeds) per point"});
  s.add({.path = "designs.*.scramble", .type = ValueType::boolean, .default_value = true,
         .doc = "sobol: linear matrix scramble + digital shift; latin_hypercube: random position in each "
                "stratum (false: stratum centres)"});
  s.add({.path = "designs.*.points_per_dim", .type = ValueType::integer_array,
         .default_value = std::vector<std::int64_t>{}, .min = 1, .max = 10000,
         .doc = "grid: points along each parameter (one value for all, or one per parameter)"});
  s.add({.path = "designs.*.parameters", .type = ValueType::string_array,
         .default_value = std::vector<std::string>{},
         .doc = "stencil: the parameters to step (empty: all)"});
  s.add({.path = "designs.*.step_factors", .type = ValueType::real_array, .default_value = std::vector<double>{1.0},
         .min = 0.0, .min_exclusive = true,
         .doc = "stencil: multiples of each parameter's step, one stencil per factor (convergence check)"});
  s.add({.path = "designs.*.file", .type = ValueType::string, .default_value = std::string(""),
         .doc = "list: CSV of points, header = parameter names, relative to the campaign file"});

  s.add_table("analysis", "Defaults the analysis verbs take from the catalogue's campaign.");
  s.add({.path = "analysis.select", .type = ValueType::string_array, .default_value = std::vector<std::string>{},
         .doc = "selections (docs/analysis.md) that covariance, fisher and export use when no --select is given "
                "(empty: every coefficient)"});
}

const core::Schema& campaign_schema() {
  static const core::Schema schema = [] {
    core::Schema s;
    declare_keys(s);
    fft::declare_keys(s);
#ifdef SPINFLIP_HAVE_COSMO
    cosmo::declare_keys(s);
#endif
#ifdef SPINFLIP_HAVE_SIM
    sim::declare_keys(s);
#endif
#ifdef SPINFLIP_HAVE_INSTRUMENT
    instrument::declare_keys(s);
#endif
#ifdef SPINFLIP_HAVE_STATS
    stats::declare_keys(s);
#endif
#ifdef SPINFLIP_HAVE_INGEST
    ingest::declare_keys(s);
#endif
    return s;
  }();
  return schema;
}

}  // namespace spinflip::campaign
