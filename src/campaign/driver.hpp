// `spinflip run`: the MPI task farm over a campaign's entries (DESIGN.md §2,
// §3, §9; docs/driver.md). The world is split into groups of g ranks; each
// group's leader takes the next entry from a one-sided atomic counter on world
// rank 0 (no idle master), the group generates the cone together, applies
// every scenario, divides the units among its ranks for the kernels, and the
// leader writes the rows. Three things are kept apart: the work list
// (todo_entries), who does which (pure functions below) and where results go
// (catalogue::Catalogue).
#pragma once
#include <mpi.h>

#include <cstddef>
#include <filesystem>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "campaign/campaign.hpp"
#include "catalogue/catalogue.hpp"
#include "fft/planning.hpp"

namespace spinflip::campaign {

struct RunOptions {
  std::filesystem::path output;    // empty: the campaign's campaign.output
  std::optional<int> group_size;   // overrides campaign.group_size
  bool retry_failed = false;       // also run entries marked failed
  double memory_limit_gb = 0;      // > 0: overrides campaign.memory_limit_gb
  std::size_t max_entries = 0;     // > 0: stop cleanly after this many (tests, probes)
};

struct RunResult {
  std::size_t total = 0, done = 0, failed = 0, pending = 0;
  std::size_t ran = 0;          // entries finished (done or failed) by this run
  bool stopped_early = false;   // a signal (or max_entries) ended the run before the work list
  int signal = 0;               // the signal that stopped it, 0 if none
  /// Rank-seconds summed over the world, by phase (docs/driver.md, "Overhead").
  struct Seconds {
    double setup = 0;       // plan check, scenario tables, catalogue create/open
    double generator = 0;   // settings, generate_cone, gathering the cone
    double instrument = 0;  // Scenario::apply
    double kernels = 0;     // slice/chunk extraction, Kernel::measure, gathering values
    double catalogue = 0;   // row writes and counter updates of the group leaders
    double farm = 0;        // taking entries: stop agreement, atomic counter, broadcast
    double tail = 0;        // waiting at the end for the last groups
    double total = 0;       // wall time × ranks
  } seconds;
};

/// Run (or resume) the campaign into its catalogue; collective on `world`.
/// ConfigError for a bad group size, a different campaign in the catalogue, or
/// a plan that cannot run (memory, geometry); entries that fail are recorded.
RunResult run(const Campaign& campaign, const RunOptions& options, MPI_Comm world);

/// Make (or load) the FFT plans the campaign's entries need and share one wisdom
/// with every rank of world, as `run` does before its first entry (docs/driver.md,
/// "FFT plans"); `own`: a catalogue's wisdom file. Collective on world.
fft::SharedWisdom prepare_fft_plans(const Campaign& campaign, const std::optional<std::filesystem::path>& own,
                                    MPI_Comm world);

/// The catalogue layout of a campaign: design, entries, history z, and per
/// scenario and kernel the units and axes (units at the fiducial cosmology).
catalogue::Layout layout_of(const Campaign& campaign);

// --- assignment policy: pure functions, testable without MPI -------------------

/// Entries still to run, in catalogue order: pending, plus failed on request.
std::vector<std::size_t> todo_entries(const std::vector<catalogue::Status>& statuses, bool retry_failed);
/// Group size check: ConfigError unless 1 ≤ g and g divides world_size.
void check_group_size(int group_size, int world_size, const std::string& origin);
/// The contiguous block [begin, end) of n units that rank r of a group of g measures.
std::pair<std::size_t, std::size_t> unit_block(std::size_t n, int r, int g);

/// Exit status of `spinflip run` stopped by a signal: the catalogue is whole and
/// resumable with entries pending (the same 3 as `status --require-complete`).
inline constexpr int exit_stopped = 3;

/// Install SIGTERM/SIGUSR1/SIGINT handlers that only set a flag (idempotent);
/// a second SIGINT ends the process at once.
void install_stop_handlers();
/// SIGTERM and SIGINT abandon the entry in progress; SIGUSR1 lets it finish.
bool abandons_entry(int sig);
/// "SIGTERM", "SIGUSR1", "SIGINT", else "signal N".
std::string signal_name(int sig);
/// The signal that asked this process to stop (0: none).
int stop_signal();
/// For tests: forget a received signal.
void reset_stop_signal();

}  // namespace spinflip::campaign
