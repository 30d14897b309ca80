// `spinflip plan`: everything a campaign needs checked before it runs, and the
// per-rank memory estimate. Pure functions of the campaign (no MPI).
#pragma once
#include <string>
#include <vector>

#include "campaign/campaign.hpp"

namespace spinflip::campaign {

/// Per-rank bytes in each phase of an entry (docs/campaign.md, "Memory").
struct MemoryEstimate {
  std::size_t n_perp = 0, n_los = 0, group_size = 1;
  double persistent = 0;  // uv-coverage tables of the scenarios, held for the whole run
  double generator = 0;   // light-cone slabs and FFT work fields
  double generator_kept = 0;  // the part of `generator` kept between cones (one-rank groups)
  double instrument = 0;  // gathered clean cone, observed copy, transverse spectrum
  double kernels = 0;     // gathered clean cone, observed copy, one chunk and its transform
  double overhead = 0;    // program, libraries, MPI buffers (fixed allowance)
  double peak() const;    // overhead + persistent + max(generator, kept + each other phase)
};
/// chunk_cells: LOS cells of one chunk (0: assume the whole cone, an upper bound);
/// group_size: ranks sharing a cone (0: campaign.group_size).
MemoryEstimate estimate_memory(const core::Config& config, std::size_t chunk_cells = 0, std::size_t group_size = 0);

struct PlanOptions {
  double memory_limit_gb = 0;  // > 0: the command line's limit (overrides the campaign's)
  int ranks_per_node = 1;      // for the node's limit: MemAvailable / ranks_per_node
  bool scan = false;           // [ingest]: read every file's data too (NaN/Inf), not only headers
  std::size_t group_size = 0;  // > 0: the run's --group-size (overrides campaign.group_size)
};

struct PlanReport {
  std::vector<std::string> lines;     // what plan prints (designs, entries, cone, units, memory)
  std::vector<std::string> warnings;  // will run, but probably not what was meant
  std::vector<std::string> problems;  // cannot run: one line each, naming the key
};
/// Validate everything the campaign's modules can check without running an entry.
PlanReport plan(const Campaign& campaign, const PlanOptions& options);

/// MemAvailable of /proc/meminfo in GB (0 if unknown).
double node_available_gb();

/// The design points as CSV: point, design, role, seed_point, then one column per parameter.
std::string points_csv(const Campaign& campaign);

}  // namespace spinflip::campaign
