// The task farm and the per-entry pipeline (docs/driver.md).
#include "campaign/driver.hpp"

#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <csignal>
#include <cstdio>
#include <ctime>
#include <exception>
#include <fstream>
#include <memory>
#include <sstream>

#include "campaign/plan.hpp"
#include "core/collective.hpp"
#include "core/errors.hpp"
#include "core/log.hpp"
#include "cosmo/cosmology.hpp"
#include "fft/fft.hpp"
#include "fft/planning.hpp"
#include "instrument/instrument.hpp"
#ifdef SPINFLIP_HAVE_INGEST
#include "ingest/ingest.hpp"
#endif
#include "sim/lightcone.hpp"
#include "stats/stats.hpp"

namespace spinflip::campaign {

namespace fs = std::filesystem;

// ------------------------------------------------------------------ signals

namespace {
volatile std::sig_atomic_t g_stop_signal = 0;

extern "C" void on_stop_signal(int sig) {
  // A second Ctrl-C means "now": the default action ends the process (the
  // catalogue survives that as it survives kill -9).
  if (sig == SIGINT && g_stop_signal == SIGINT) {
    std::signal(SIGINT, SIG_DFL);
    std::raise(SIGINT);
    return;
  }
  // SIGTERM and SIGINT outrank SIGUSR1: abandon the entry in progress at once.
  if (g_stop_signal == 0 || abandons_entry(sig)) g_stop_signal = sig;
}
}  // namespace

void install_stop_handlers() {
  struct sigaction sa {};
  sa.sa_handler = on_stop_signal;
  sigemptyset(&sa.sa_mask);
  sa.sa_flags = SA_RESTART;
  sigaction(SIGTERM, &sa, nullptr);
  sigaction(SIGUSR1, &sa, nullptr);
  sigaction(SIGINT, &sa, nullptr);
}
bool abandons_entry(int sig) { return sig == SIGTERM || sig == SIGINT; }
std::string signal_name(int sig) {
  switch (sig) {
    case SIGTERM: return "SIGTERM";
    case SIGUSR1: return "SIGUSR1";
    case SIGINT: return "SIGINT";
    default: return "signal " + std::to_string(sig);
  }
}
int stop_signal() { return g_stop_signal; }
void reset_stop_signal() { g_stop_signal = 0; }

// ------------------------------------------------------ assignment policy

std::vector<std::size_t> todo_entries(const std::vector<catalogue::Status>& statuses, bool retry_failed) {
  std::vector<std::size_t> out;
  for (std::size_t e = 0; e < statuses.size(); ++e)
    if (statuses[e] == catalogue::Status::pending || (retry_failed && statuses[e] == catalogue::Status::failed))
      out.push_back(e);
  return out;
}

void check_group_size(int g, int world_size, const std::string& origin) {
  if (g < 1)
    throw ConfigError(origin + ": group size " + std::to_string(g) + " is not allowed: at least 1");
  if (world_size % g != 0)
    throw ConfigError(origin + ": group size " + std::to_string(g) + " does not divide the " +
                      std::to_string(world_size) + " MPI ranks: allowed group sizes divide the rank count (e.g. 1" +
                      (world_size % 2 == 0 ? ", 2" : "") + ", " + std::to_string(world_size) + ")");
}

std::pair<std::size_t, std::size_t> unit_block(std::size_t n, int r, int g) {
  const auto R = static_cast<std::size_t>(r), G = static_cast<std::size_t>(g);
  return {n * R / G, n * (R + 1) / G};
}

// ------------------------------------------------------------------ setup

namespace {

int rank_of(MPI_Comm c) {
  int r = 0;
  SPINFLIP_CHECK_MPI(MPI_Comm_rank(c, &r));
  return r;
}
int size_of(MPI_Comm c) {
  int s = 1;
  SPINFLIP_CHECK_MPI(MPI_Comm_size(c, &s));
  return s;
}

std::size_t fiducial_point_of(const Campaign& c) {
  for (std::size_t i = 0; i < c.points().size(); ++i)
    if (c.points()[i].role == Role::fiducial) return i;
  return 0;
}

/// Everything an entry needs that does not depend on the entry: built once.
struct Setup {
  core::Config fiducial_config;
  instrument::ConeGeometry geometry;
  std::vector<instrument::Scenario> scenarios;
  std::vector<std::unique_ptr<stats::Kernel>> kernels;
  std::vector<instrument::Unit> slices, chunks;
  stats::Geometry slice_geometry, chunk_geometry;
  // Kept modes per scenario and unit (DESIGN.md §5 "Observed modes"): the same for every entry.
  std::vector<std::vector<stats::KeptModes>> slice_kept, chunk_kept;
  catalogue::Layout layout;
#ifdef SPINFLIP_HAVE_INGEST
  std::optional<ingest::Manifest> manifest;  // [ingest]: cones come from these files
#endif

  explicit Setup(const Campaign& c) : fiducial_config(c.config_for_point(fiducial_point_of(c))) {
    const core::Config& cfg = c.config();
#ifdef SPINFLIP_HAVE_INGEST
    if (cfg.has_table("ingest")) manifest = ingest::manifest_from(cfg);
#endif
    const cosmo::Cosmology cosmology(cosmo::parameters_from(fiducial_config));
    const sim::ConeSettings cone = sim::settings_from(fiducial_config);
    // LOS cell centres exactly as sim::generate_cone places them.
    geometry.shape = {cone.n_perp, cone.n_perp, cone.n_los};
    geometry.cell_mpc = cone.cell_mpc;
    const double d_near = cosmology.comoving_distance_mpc(cone.z_min);
    for (std::size_t k = 0; k < cone.n_los; ++k) {
      geometry.distance_mpc.push_back(d_near + (static_cast<double>(k) + 0.5) * cone.cell_mpc);
      geometry.z.push_back(cosmology.redshift_at_comoving_distance(geometry.distance_mpc.back()));
      geometry.freq_MHz.push_back(cosmo::frequency_MHz(geometry.z.back()));
    }
    scenarios = instrument::scenarios_from(fiducial_config, cosmology, geometry);
    kernels = stats::kernels_from(cfg);
    bool need_slices = false, need_chunks = false;
    for (const auto& k : kernels) (k->unit_kind() == stats::UnitKind::slice ? need_slices : need_chunks) = true;
    if (need_slices) slices = instrument::slice_units(cfg, geometry);
    if (need_chunks) chunks = instrument::chunk_units(cfg, geometry);
    const double dx = cone.cell_mpc;
    slice_geometry.shape = {cone.n_perp, cone.n_perp};
    slice_geometry.cell_mpc = {dx, dx, 0.0};
    chunk_geometry.shape = {cone.n_perp, cone.n_perp, chunks.empty() ? 0 : chunks.front().los_end - chunks.front().los_begin};
    chunk_geometry.cell_mpc = {dx, dx, dx};
    for (const auto& k : kernels) {
      const bool slice = k->unit_kind() == stats::UnitKind::slice;
      if ((slice ? slices : chunks).empty())
        throw ConfigError(cfg.location("stats." + k->name()) + ": [stats." + k->name() + "] measures " +
                          (slice ? "slices" : "chunks") + " but the campaign's band holds none ([" +
                          (slice ? "slices" : "chunks") + "] settings)");
      try {
        k->check(slice ? slice_geometry : chunk_geometry);
      } catch (const InputError& e) {
        throw ConfigError(cfg.location("stats." + k->name()) + ": [stats." + k->name() + "]: " + e.what());
      }
    }
    for (const auto& s : scenarios) {
      slice_kept.emplace_back();
      chunk_kept.emplace_back();
      for (const auto& u : slices) slice_kept.back().push_back(s.kept_modes(u, false, geometry));
      for (const auto& u : chunks) chunk_kept.back().push_back(s.kept_modes(u, true, geometry));
    }
    build_layout(c);
  }

  const stats::KeptModes& kept_of(const stats::Kernel& k, std::size_t scenario, std::size_t unit) const {
    return (k.unit_kind() == stats::UnitKind::slice ? slice_kept : chunk_kept)[scenario][unit];
  }

  const std::vector<instrument::Unit>& units_of(const stats::Kernel& k) const {
    return k.unit_kind() == stats::UnitKind::slice ? slices : chunks;
  }
  const stats::Geometry& geometry_of(const stats::Kernel& k) const {
    return k.unit_kind() == stats::UnitKind::slice ? slice_geometry : chunk_geometry;
  }

  /// The kernel's axes for one scenario: mode counts (n_modes, n_triangles) count kept
  /// modes; as an axis, the fewest over the units (0 when a bin is empty in any unit),
  /// and per unit in `<axis>_by_unit` (docs/catalogue.md).
  std::vector<catalogue::Axis> kept_axes(const stats::Kernel& k, std::size_t scenario) const {
    const auto& g = geometry_of(k);
    std::vector<catalogue::Axis> out;
    for (auto& a : k.axes(g)) out.push_back({a.name, a.values});
    const std::size_t nu = units_of(k).size();
    std::vector<std::vector<std::int64_t>> by_unit(out.size());
    for (std::size_t u = 0; u < nu; ++u) {
      const auto& kept = kept_of(k, scenario, u);
      if (kept.all()) return out;  // a clean unit: counts are the kernel's own
      const auto ax = k.axes_kept(g, kept);
      for (std::size_t a = 0; a < out.size(); ++a) {
        const auto* counts = std::get_if<std::vector<std::int64_t>>(&ax[a].values);
        if (!counts || (ax[a].name != "n_modes" && ax[a].name != "n_triangles")) continue;
        by_unit[a].insert(by_unit[a].end(), counts->begin(), counts->end());
        auto& fewest = std::get<std::vector<std::int64_t>>(out[a].values);
        for (std::size_t c = 0; c < fewest.size(); ++c) fewest[c] = u == 0 ? (*counts)[c] : std::min(fewest[c], (*counts)[c]);
      }
    }
    std::vector<catalogue::Axis> per_unit;
    for (std::size_t a = 0; a < out.size(); ++a)
      if (!by_unit[a].empty()) per_unit.push_back({out[a].name + "_by_unit", by_unit[a]});
    for (auto& a : per_unit) out.push_back(std::move(a));
    return out;
  }

  void build_layout(const Campaign& c) {
    const core::Config& cfg = c.config();
    catalogue::Layout& L = layout;
    L.campaign_sha256 = c.sha256();
    L.campaign_text = cfg.text();
    L.campaign_file = cfg.source_name();
    L.attributes = {{"campaign_name", cfg.string("campaign.name")},
                    {"campaign_seed", cfg.integer("campaign.seed")},
                    {"fiducial_point", static_cast<std::int64_t>(fiducial_point_of(c))}};
    for (const auto& p : c.parameters()) L.parameters.push_back({p.name, p.unit, p.log, p.min, p.max, p.fiducial, p.label});
    for (const auto& d : c.designs()) L.design_names.push_back(d.name);
    for (const auto& p : c.points())
      L.points.push_back({p.values, role_name(p.role), p.design_index, p.stencil_param, p.stencil_step_index,
                          p.stencil_step, static_cast<std::int64_t>(p.seed_point)});
    for (const auto& e : c.entries()) {
      const rng::EntryKey key = c.entry_key(e);
      L.entries.push_back({static_cast<std::int64_t>(e.point), static_cast<std::int64_t>(e.realisation),
                           {key.campaign_seed, key.point, key.realisation}, {}});
#ifdef SPINFLIP_HAVE_INGEST
      if (manifest)
        if (auto row = ingest::row_of(*manifest, c.points()[e.point].values, e.realisation))
          L.entries.back().source_file = manifest->rows[*row].file.string();
#endif
    }
    L.history_z = geometry.z;
    for (std::size_t si = 0; si < scenarios.size(); ++si) {
      const auto& s = scenarios[si];
      catalogue::ScenarioLayout sl;
      sl.name = s.name();
      sl.attributes = s.attributes();
      for (const auto& k : kernels) {
        catalogue::KernelLayout kl;
        kl.name = k->name();
        kl.unit_kind = k->unit_kind() == stats::UnitKind::slice ? "slice" : "chunk";
        const auto& g = geometry_of(*k);
        kl.n_coeff = k->n_coeff(g);
        kl.axes = kept_axes(*k, si);
        for (const auto& u : units_of(*k)) kl.unit_freq_MHz.push_back(u.freq_MHz), kl.unit_z.push_back(u.z);
        kl.attributes = k->attributes();
        sl.kernels.push_back(std::move(kl));
      }
      L.scenarios.push_back(std::move(sl));
    }
  }
};

/// The FFT plans an entry will need, made once before the farm (docs/driver.md,
/// "FFT plans"): the generator's slab transforms (together by the first group when
/// groups share cones), then on world rank 0 alone every scenario's transforms and
/// every kernel's on one unit of a test pattern. Collective on world.
void prepare_plans(const Setup& setup, MPI_Comm world, int g) {
  const auto& shape = setup.geometry.shape;
  bool generated = true;
#ifdef SPINFLIP_HAVE_INGEST
  generated = !setup.manifest.has_value();
#endif
  if (generated && g > 1) {
    const int wrank = rank_of(world);
    MPI_Comm first = MPI_COMM_NULL;
    SPINFLIP_CHECK_MPI(MPI_Comm_split(world, wrank < g ? 0 : MPI_UNDEFINED, wrank, &first));
    if (first != MPI_COMM_NULL) {
      { const fft::SlabField field(shape, first); }
      fft::gather_wisdom(first);  // every rank's local sub-plans, onto world rank 0
      MPI_Comm_free(&first);
    }
  }
  core::run_on_root(world, [&] {
    if (generated && g == 1) const fft::SlabField field(shape, MPI_COMM_SELF);
    core::Array3<float> pattern(shape[0], shape[1], shape[2]);
    for (std::size_t i = 0; i < pattern.size(); ++i)
      pattern.data[i] = static_cast<float>((i * 2654435761u) % 1000) * 0.01f;
    for (const auto& s : setup.scenarios) {
      core::Array3<float> observed = pattern;
      s.apply(observed, setup.geometry, rng::EntryKey{0, 0, 0});
    }
    for (const auto& k : setup.kernels) {
      const auto& units = setup.units_of(*k);
      if (units.empty()) continue;
      if (k->unit_kind() == stats::UnitKind::slice)
        (void)k->measure(instrument::extract_slice(pattern, units.front()).data.data(), setup.geometry_of(*k));
      else
        (void)k->measure(instrument::extract_chunk(pattern, units.front()).data.data(), setup.geometry_of(*k));
    }
  });
}

/// Share one wisdom with every rank (fft::share_wisdom) and say what planning cost.
fft::SharedWisdom share_plans(const Campaign& c, const Setup& setup, const std::optional<fs::path>& own, MPI_Comm world,
                              int g) {
  fft::SharedWisdom w = fft::share_wisdom(world, own, fft::wisdom_cache_from(c.config()),
                                          [&] { prepare_plans(setup, world, g); });
  std::size_t measured = 0;
  for (const auto& r : w.made)
    if (r.how == "measured" || r.how == "patient") ++measured;
  if (rank_of(world) == 0)
    log::info("fft: {} plans prepared in {:.1f} s ({} measured), wisdom {} from {}", w.made.size(), w.seconds,
              measured, w.sha256.substr(0, 12), w.source);
  return w;
}

/// The shared counters on world rank 0: the next todo index, entries done and
/// failed by this run, and a stop flag any group may raise.
class Counter {
 public:
  enum Slot : int { next = 0, done = 1, failed = 2, stop = 3 };
  explicit Counter(MPI_Comm world) : unwinding_(std::uncaught_exceptions()) {
    const bool root = rank_of(world) == 0;
    SPINFLIP_CHECK_MPI(MPI_Win_allocate(root ? 4 * sizeof(std::int64_t) : 0, sizeof(std::int64_t), MPI_INFO_NULL,
                                        world, &base_, &win_));
    if (root) {
      SPINFLIP_CHECK_MPI(MPI_Win_lock(MPI_LOCK_EXCLUSIVE, 0, 0, win_));
      std::fill(base_, base_ + 4, std::int64_t{0});
      SPINFLIP_CHECK_MPI(MPI_Win_unlock(0, win_));
    }
    SPINFLIP_CHECK_MPI(MPI_Barrier(world));
  }
  Counter(const Counter&) = delete;
  Counter& operator=(const Counter&) = delete;
  ~Counter() {
    // MPI_Win_free is collective: a rank unwinding alone must not wait in it.
    if (win_ != MPI_WIN_NULL && std::uncaught_exceptions() == unwinding_) MPI_Win_free(&win_);
  }
  /// Atomically add `delta` to a slot and return its previous value.
  std::int64_t add(Slot slot, std::int64_t delta) {
    std::int64_t old = 0;
    SPINFLIP_CHECK_MPI(MPI_Win_lock(MPI_LOCK_SHARED, 0, 0, win_));
    SPINFLIP_CHECK_MPI(MPI_Fetch_and_op(&delta, &old, MPI_INT64_T, 0, slot, MPI_SUM, win_));
    SPINFLIP_CHECK_MPI(MPI_Win_unlock(0, win_));
    return old;
  }
  std::int64_t read(Slot slot) {
    std::int64_t value = 0, unused = 0;
    SPINFLIP_CHECK_MPI(MPI_Win_lock(MPI_LOCK_SHARED, 0, 0, win_));
    SPINFLIP_CHECK_MPI(MPI_Fetch_and_op(&unused, &value, MPI_INT64_T, 0, slot, MPI_NO_OP, win_));
    SPINFLIP_CHECK_MPI(MPI_Win_unlock(0, win_));
    return value;
  }
  void free() {
    if (win_ != MPI_WIN_NULL) SPINFLIP_CHECK_MPI(MPI_Win_free(&win_));
  }

 private:
  std::int64_t* base_ = nullptr;
  MPI_Win win_ = MPI_WIN_NULL;
  int unwinding_;
};

/// Owner of a communicator made by MPI_Comm_split.
struct Comm {
  MPI_Comm comm = MPI_COMM_NULL;
  Comm() = default;
  Comm(const Comm&) = delete;
  Comm& operator=(const Comm&) = delete;
  ~Comm() {
    if (comm != MPI_COMM_NULL) MPI_Comm_free(&comm);
  }
};

/// Thrown inside an entry when the group agrees to abandon it (SIGTERM, SIGINT).
struct Abandon {};
/// An entry-level failure every rank of the group agrees on.
struct EntryFailed {
  std::string message;
};

std::string utc_now() {
  std::time_t t = std::time(nullptr);
  std::tm tm{};
  gmtime_r(&t, &tm);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%SZ", &tm);
  return buf;
}

std::string duration_text(double s) {
  if (!std::isfinite(s) || s < 0) return "unknown";
  char buf[48];
  const long t = std::lround(s);
  if (t >= 3600)
    std::snprintf(buf, sizeof buf, "%ldh%02ldm", t / 3600, (t % 3600) / 60);
  else if (t >= 60)
    std::snprintf(buf, sizeof buf, "%ldm%02lds", t / 60, t % 60);
  else
    std::snprintf(buf, sizeof buf, "%lds", t);
  return buf;
}

std::string json_string(const std::string& s) {
  std::string out = "\"";
  for (char ch : s) {
    if (ch == '"' || ch == '\\') out += '\\', out += ch;
    else if (static_cast<unsigned char>(ch) < 0x20) {
      char buf[8];
      std::snprintf(buf, sizeof buf, "\\u%04x", ch);
      out += buf;
    } else out += ch;
  }
  return out + "\"";
}

/// Rank 0's progress: log lines and `<catalogue>.progress.json` (written to a
/// temporary file and renamed, so a reader never sees half a file).
class Progress {
 public:
  Progress(fs::path catalogue, std::string campaign, std::size_t total, std::size_t done0, std::size_t failed0,
           std::size_t todo, int ranks, int groups, double interval_s)
      : file_(catalogue.string() + ".progress.json"), catalogue_(std::move(catalogue)), campaign_(std::move(campaign)),
        total_(total), done0_(done0), failed0_(failed0), todo_(todo), ranks_(ranks), groups_(groups),
        interval_(interval_s), start_(now()), last_(start_) {}

  /// Log and rewrite the file if the interval has passed (or `force`).
  void tick(Counter& counter, bool force = false, const std::string& state = "running") {
    const double t = now();
    if (!force && t - last_ < interval_) return;
    last_ = t;
    const auto done_run = static_cast<std::size_t>(counter.read(Counter::done));
    const auto failed_run = static_cast<std::size_t>(counter.read(Counter::failed));
    const std::size_t ran = done_run + failed_run;
    const std::size_t done = done0_ + done_run, failed = failed0_ + failed_run;
    const std::size_t pending = total_ - std::min(total_, done + failed);
    const double elapsed = t - start_;
    const double per_min = elapsed > 0 ? 60.0 * static_cast<double>(ran) / elapsed : 0.0;
    const double left = ran > 0 ? elapsed / static_cast<double>(ran) * static_cast<double>(todo_ - std::min(todo_, ran))
                                : std::nan("");
    if (state == "running")
      log::info("progress: {}/{} entries done, {} failed, {} pending; {:.2f} entries/min; time left {}", done, total_,
                failed, pending, per_min, duration_text(left));
    std::ostringstream js;
    js.precision(6);
    js << "{\n  \"campaign\": " << json_string(campaign_) << ",\n  \"catalogue\": " << json_string(catalogue_.string())
       << ",\n  \"state\": " << json_string(state) << ",\n  \"updated_utc\": " << json_string(utc_now())
       << ",\n  \"total\": " << total_ << ",\n  \"done\": " << done << ",\n  \"failed\": " << failed
       << ",\n  \"pending\": " << pending << ",\n  \"ran_this_run\": " << ran << ",\n  \"to_run_this_run\": " << todo_
       << ",\n  \"elapsed_s\": " << elapsed << ",\n  \"entries_per_minute\": " << per_min
       << ",\n  \"time_left_s\": " << (std::isfinite(left) ? std::to_string(left) : std::string("null"))
       << ",\n  \"ranks\": " << ranks_ << ",\n  \"groups\": " << groups_ << "\n}\n";
    const fs::path tmp = file_.string() + ".tmp";
    {
      std::ofstream out(tmp);
      out << js.str();
      if (!out) {
        log::warn("cannot write the progress file {}", tmp.string());
        return;
      }
    }
    std::error_code ec;
    fs::rename(tmp, file_, ec);
    if (ec) log::warn("cannot rename {} to {}: {}", tmp.string(), file_.string(), ec.message());
  }

 private:
  static double now() { return MPI_Wtime(); }
  fs::path file_, catalogue_;
  std::string campaign_;
  std::size_t total_, done0_, failed0_, todo_;
  int ranks_, groups_;
  double interval_, start_, last_;
};

/// The lowest rank's non-empty `text`, on every rank ("" if all are empty).
std::string agreed_text(const std::string& text, MPI_Comm comm) {
  const int size = size_of(comm);
  int mine = text.empty() ? size : rank_of(comm), first = size;
  SPINFLIP_CHECK_MPI(MPI_Allreduce(&mine, &first, 1, MPI_INT, MPI_MIN, comm));
  if (first == size) return {};
  std::string out = text;
  long long n = static_cast<long long>(out.size());
  SPINFLIP_CHECK_MPI(MPI_Bcast(&n, 1, MPI_LONG_LONG, first, comm));
  out.resize(static_cast<std::size_t>(n));
  SPINFLIP_CHECK_MPI(MPI_Bcast(out.data(), static_cast<int>(n), MPI_CHAR, first, comm));
  return out;
}

/// An exception leaving the farm (an HDF5 or MPI failure) still leaves the
/// progress file saying how the run ended, not "running".
struct ProgressOnError {
  Progress* progress;
  Counter& counter;
  int unwinding_at_start = std::uncaught_exceptions();
  ~ProgressOnError() {
    if (!progress || std::uncaught_exceptions() <= unwinding_at_start) return;
    try {
      progress->tick(counter, true, "error");
    } catch (...) {  // the error already on its way to main() is the one to report
    }
  }
};

/// One group's state while it runs entries.
class Worker {
 public:
  Worker(const Campaign& c, const Setup& setup, catalogue::Catalogue& cat, MPI_Comm group, int world_rank,
         Progress* progress, Counter& counter)
      : c_(c), setup_(setup), cat_(cat), group_(group), grank_(rank_of(group)), gsize_(size_of(group)),
        world_rank_(world_rank), progress_(progress), counter_(counter) {}

  /// Run one entry; true if it finished (done or failed), false if abandoned.
  RunResult::Seconds times;  // this rank's time by phase
  std::string write_error;   // the first catalogue write the file system refused

  bool run_entry(std::size_t index) {
    const double t0 = MPI_Wtime();
    const Entry& entry = c_.entries().at(index);
    catalogue::EntryResult result;
    std::string failure;
    try {
      compute(entry, result);
    } catch (const Abandon&) {
      return false;
    } catch (const EntryFailed& f) {
      failure = f.message;
    }
    const double seconds = MPI_Wtime() - t0;
    const double w0 = MPI_Wtime();
    if (grank_ == 0) try {
      if (failure.empty()) {
        result.wall_time_s = seconds;
        result.rank = world_rank_;
        cat_.write_entry(index, result);
        counter_.add(Counter::done, 1);
        log::debug("entry {} (point {}, realisation {}) done in {:.2f} s", index, entry.point, entry.realisation,
                   seconds);
      } else {
        cat_.write_failure(index, failure, seconds, world_rank_);
        counter_.add(Counter::failed, 1);
        log::warn("entry {} (point {}, realisation {}) failed: {}", index, entry.point, entry.realisation, failure);
      }
    } catch (const IoError& e) {
      // The file system refused the rows (a full disk): the entry stays
      // pending, every group stops at its next entry, and run() reports this
      // once all ranks have left the farm and closed the file.
      if (write_error.empty())
        write_error = std::string(e.what()) + " (entry " + std::to_string(index) + ", point " +
                      std::to_string(entry.point) + ", realisation " + std::to_string(entry.realisation) + ")";
      counter_.add(Counter::stop, 1);
    }
    times.catalogue += MPI_Wtime() - w0;
    tick();
    return true;
  }

 private:
  void tick() {
    if (progress_) progress_->tick(counter_);
  }

  /// Between stages: abandon the entry if any rank of the group got SIGTERM.
  void checkpoint() {
    tick();
    int mine = abandons_entry(stop_signal()) ? 1 : 0, any = 0;
    SPINFLIP_CHECK_MPI(MPI_Allreduce(&mine, &any, 1, MPI_INT, MPI_MAX, group_));
    if (any) throw Abandon{};
  }

  /// Run `f` on every rank; if it throws a user-level error on any rank, the
  /// whole group fails the entry with the lowest failing rank's message.
  template <class F>
  void agreed(F&& f) {
    std::string message;
    try {
      f();
    } catch (const Error& e) {
      message = e.what();
      if (message.empty()) message = "error";
    } catch (const std::exception& e) {
      message = std::string("internal error: ") + e.what();
    }
    int mine = message.empty() ? gsize_ : grank_, first = 0;
    SPINFLIP_CHECK_MPI(MPI_Allreduce(&mine, &first, 1, MPI_INT, MPI_MIN, group_));
    if (first == gsize_) return;
    long long n = static_cast<long long>(message.size());
    SPINFLIP_CHECK_MPI(MPI_Bcast(&n, 1, MPI_LONG_LONG, first, group_));
    message.resize(static_cast<std::size_t>(n));
    SPINFLIP_CHECK_MPI(MPI_Bcast(message.data(), static_cast<int>(n), MPI_CHAR, first, group_));
    throw EntryFailed{message};
  }

  void compute(const Entry& entry, catalogue::EntryResult& result) {
    const rng::EntryKey key = c_.entry_key(entry);
    // Settings and cosmology are checked identically on every rank before any
    // collective call, so a bad parameter fails the entry on all of them alike.
    std::optional<sim::ConeSettings> settings;
    std::optional<cosmo::Cosmology> cosmology;
    double t = MPI_Wtime();
    auto lap = [&t](double& into) {
      const double now = MPI_Wtime();
      into += now - t;
      t = now;
    };
    agreed([&] {
      const core::Config cfg = c_.config_for_point(entry.point);
      settings = sim::settings_from(cfg);
      cosmology.emplace(cosmo::parameters_from(cfg));
      sim::check_settings(*settings, *cosmology);
    });
    sim::LightCone cone;
#ifdef SPINFLIP_HAVE_INGEST
    if (setup_.manifest)
      agreed([&] {
        auto row = ingest::row_of(*setup_.manifest, c_.points()[entry.point].values, entry.realisation);
        if (!row) throw InputError("no manifest row for this entry");
        auto got = ingest::read_cone(*setup_.manifest, *row, ingest::target_from(*settings, *cosmology), *cosmology,
                                     group_);
        result.source_file = got.file.string();
        result.source_sha256 = got.sha256;
        cone = std::move(got.cone);
      });
    else
#endif
      agreed([&] { cone = sim::generate_cone(*settings, *cosmology, key, group_); });
    checkpoint();
    core::Array3<float> clean = sim::allgather_cone(cone, group_);
    agreed([&] { stats::check_finite(clean.data.data(), clean.size(), "light cone δT_b"); });
    result.x_hi = cone.x_hi_mean;
    result.mean_tb_mK = cone.tb_mean_mK;
    result.mean_tk_K = cone.tk_mean_K;
    result.mean_ts_K = cone.ts_mean_K;
    cone = sim::LightCone{};  // the slab is no longer needed
    lap(times.generator);

    result.values.resize(setup_.scenarios.size());
    for (std::size_t s = 0; s < setup_.scenarios.size(); ++s) {
      core::Array3<float> observed = clean, second;
      agreed([&] { setup_.scenarios[s].apply(observed, setup_.geometry, key); });
      if (setup_.scenarios[s].settings().cross_power) {  // the independent second noise realisation
        second = clean;
        agreed([&] { setup_.scenarios[s].apply(second, setup_.geometry, key, true); });
      }
      checkpoint();
      lap(times.instrument);
      for (const auto& kernel : setup_.kernels)
        result.values[s].push_back(measure(*kernel, s, observed, second.data.empty() ? nullptr : &second));
      checkpoint();
      lap(times.kernels);
    }
  }

  /// This rank's block of units, gathered in unit order on the group leader.
  /// `second`: the second noise realisation of a cross_power scenario (else null).
  std::vector<double> measure(const stats::Kernel& k, std::size_t scenario, const core::Array3<float>& observed,
                              const core::Array3<float>* second) {
    const auto& units = setup_.units_of(k);
    const auto& g = setup_.geometry_of(k);
    const std::size_t nc = k.n_coeff(g), nu = units.size();
    const auto [begin, end] = unit_block(nu, grank_, gsize_);
    std::vector<double> mine((end - begin) * nc);
    agreed([&] {
      for (std::size_t u = begin; u < end; ++u) {
        std::vector<double> v;
        const auto& kept = setup_.kept_of(k, scenario, u);
        if (k.unit_kind() == stats::UnitKind::slice) {
          const auto slice = instrument::extract_slice(observed, units[u]);
          v = second ? k.measure_cross(slice.data.data(), instrument::extract_slice(*second, units[u]).data.data(), g, kept)
                     : k.measure_kept(slice.data.data(), g, kept);
        } else {
          const auto chunk = instrument::extract_chunk(observed, units[u]);
          v = second ? k.measure_cross(chunk.data.data(), instrument::extract_chunk(*second, units[u]).data.data(), g, kept)
                     : k.measure_kept(chunk.data.data(), g, kept);
        }
        if (v.size() != nc)
          throw InternalError("kernel " + k.name() + " returned " + std::to_string(v.size()) + " values, expected " +
                              std::to_string(nc));
        std::copy(v.begin(), v.end(), mine.begin() + static_cast<std::ptrdiff_t>((u - begin) * nc));
      }
    });
    if (gsize_ == 1) return mine;
    std::vector<int> counts(static_cast<std::size_t>(gsize_)), displs(static_cast<std::size_t>(gsize_));
    for (int r = 0; r < gsize_; ++r) {
      const auto [b, e] = unit_block(nu, r, gsize_);
      counts[static_cast<std::size_t>(r)] = static_cast<int>((e - b) * nc);
      displs[static_cast<std::size_t>(r)] = static_cast<int>(b * nc);
    }
    std::vector<double> all(grank_ == 0 ? nu * nc : 0);
    SPINFLIP_CHECK_MPI(MPI_Gatherv(mine.data(), static_cast<int>(mine.size()), MPI_DOUBLE, all.data(), counts.data(),
                                   displs.data(), MPI_DOUBLE, 0, group_));
    return all;
  }

  const Campaign& c_;
  const Setup& setup_;
  catalogue::Catalogue& cat_;
  MPI_Comm group_;
  int grank_, gsize_, world_rank_;
  Progress* progress_;
  Counter& counter_;
};

int ranks_per_node(MPI_Comm world) {
  MPI_Comm node = MPI_COMM_NULL;
  SPINFLIP_CHECK_MPI(MPI_Comm_split_type(world, MPI_COMM_TYPE_SHARED, 0, MPI_INFO_NULL, &node));
  int n = size_of(node);
  MPI_Comm_free(&node);
  return n;
}

}  // namespace

catalogue::Layout layout_of(const Campaign& campaign) { return Setup(campaign).layout; }

fft::SharedWisdom prepare_fft_plans(const Campaign& c, const std::optional<fs::path>& own, MPI_Comm world) {
  fft::set_planning(fft::planning_from(c.config()));
  fft::set_wisdom_only(true);
  const Setup setup(c);
  // A group larger than this launch plans on the ranks there are (run under g ranks for the slab plans).
  const int g = std::min(static_cast<int>(c.config().integer("campaign.group_size")), size_of(world));
  return share_plans(c, setup, own, world, g);
}

RunResult run(const Campaign& c, const RunOptions& options, MPI_Comm world) {
  const double t_start = MPI_Wtime();
  const int wrank = rank_of(world), wsize = size_of(world);
  const core::Config& cfg = c.config();
  const int g = options.group_size ? *options.group_size : static_cast<int>(cfg.integer("campaign.group_size"));
  check_group_size(g, wsize, options.group_size ? std::string("--group-size") : cfg.location("campaign.group_size") +
                                                                                   ": campaign.group_size");
  const fs::path output = options.output.empty() ? c.output_path() : options.output;
  // Until the run's wisdom is shared, nothing may measure a plan on its own.
  fft::set_planning(fft::planning_from(cfg));
  fft::set_wisdom_only(true);

  // Everything `spinflip plan` refuses, run refuses too (memory, geometry, kernels).
  const int per_node = ranks_per_node(world);
  core::run_on_root(world, [&] {
    PlanOptions po;
    po.memory_limit_gb = options.memory_limit_gb;
    po.ranks_per_node = per_node;
    if (options.group_size) po.group_size = static_cast<std::size_t>(g);  // --group-size overrides the campaign's
    PlanReport report = plan(c, po);
    if (!report.problems.empty())
      throw ConfigError(report.problems.front() +
                        (report.problems.size() > 1
                             ? " (and " + std::to_string(report.problems.size() - 1) + " more: see spinflip plan)"
                             : std::string()));
  });

  log::debug("run: plan checks passed ({:.2f} s)", MPI_Wtime() - t_start);
  Setup setup(c);
  log::debug("run: scenarios and kernels set up ({:.2f} s)", MPI_Wtime() - t_start);
  // One wisdom for every rank before any plan of an entry (DESIGN.md §3, §11): the
  // catalogue keeps it beside itself, so a resumed run uses the same plans.
  const fft::SharedWisdom wisdom = share_plans(c, setup, fs::path(output.string() + ".fftw-wisdom"), world, g);
  setup.layout.attributes.push_back({"fft_wisdom_sha256", wisdom.sha256});
  log::debug("run: FFT plans ready ({:.2f} s)", MPI_Wtime() - t_start);
  int exists = 0;
  if (wrank == 0) exists = fs::exists(output) ? 1 : 0;
  SPINFLIP_CHECK_MPI(MPI_Bcast(&exists, 1, MPI_INT, 0, world));
  catalogue::Catalogue cat = exists ? catalogue::Catalogue::open(output, setup.layout, world)
                                    : catalogue::Catalogue::create(output, setup.layout, world);
  const auto statuses = cat.statuses();
  log::debug("run: catalogue ready ({:.2f} s)", MPI_Wtime() - t_start);
  std::vector<std::size_t> todo = todo_entries(statuses, options.retry_failed);
  std::size_t done0 = 0, failed0 = 0;
  for (auto s : statuses) {
    if (s == catalogue::Status::done) ++done0;
    if (s == catalogue::Status::failed && !options.retry_failed) ++failed0;
  }
  std::size_t limit = todo.size();
  if (options.max_entries > 0) limit = std::min(limit, options.max_entries);

  Comm group;
  SPINFLIP_CHECK_MPI(MPI_Comm_split(world, wrank / g, wrank, &group.comm));
  const int grank = rank_of(group.comm);
  const int n_groups = wsize / g;
  if (wrank == 0)
    log::info("run: campaign '{}', {} entries ({} done, {} failed, {} to run) into {} ({}); {} ranks in {} groups of {}",
              cfg.string("campaign.name"), statuses.size(), done0, statuses.size() - done0 - todo.size(),
              todo.size(), output.string(), exists ? "resumed" : "created", wsize, n_groups, g);

  // From here a signal is a clean, resumable stop. Before, nothing this run
  // made needs one: the default action ends the process at once (a catalogue
  // being created is still <catalogue>.partial).
  install_stop_handlers();
  Counter counter(world);
  std::unique_ptr<Progress> progress;
  if (wrank == 0)
    progress = std::make_unique<Progress>(output, cfg.string("campaign.name"), statuses.size(), done0, failed0,
                                          limit, wsize, n_groups, cfg.real("campaign.progress_interval_s"));
  if (progress) progress->tick(counter, true);
  ProgressOnError progress_on_error{progress.get(), counter};
  Worker worker(c, setup, cat, group.comm, wrank, progress.get(), counter);

  bool abandoned = false;
  const double t_farm = MPI_Wtime();
  double farm_seconds = 0;
  while (true) {
    const double f0 = MPI_Wtime();
    int mine = stop_signal() != 0 ? 1 : 0, any = 0;
    SPINFLIP_CHECK_MPI(MPI_Allreduce(&mine, &any, 1, MPI_INT, MPI_MAX, group.comm));
    long long index = -1;
    if (grank == 0) {
      if (any) counter.add(Counter::stop, 1);  // every group stops at its next entry
      if (counter.read(Counter::stop) == 0) {
        const std::int64_t i = counter.add(Counter::next, 1);
        if (i < static_cast<std::int64_t>(limit)) index = i;
      }
    }
    SPINFLIP_CHECK_MPI(MPI_Bcast(&index, 1, MPI_LONG_LONG, 0, group.comm));
    farm_seconds += MPI_Wtime() - f0;
    if (index < 0) break;
    if (!worker.run_entry(todo[static_cast<std::size_t>(index)])) {
      abandoned = true;
      break;
    }
  }

  // Every group has left the farm; counters are final once all ranks are here.
  const double t_left = MPI_Wtime();
  SPINFLIP_CHECK_MPI(MPI_Barrier(world));
  const double t_end = MPI_Wtime();
  int sig = stop_signal(), any_sig = 0;
  SPINFLIP_CHECK_MPI(MPI_Allreduce(&sig, &any_sig, 1, MPI_INT, MPI_MAX, world));
  int any_abandoned = 0, mine_abandoned = abandoned ? 1 : 0;
  SPINFLIP_CHECK_MPI(MPI_Allreduce(&mine_abandoned, &any_abandoned, 1, MPI_INT, MPI_MAX, world));
  long long counts[2] = {0, 0};
  if (wrank == 0) counts[0] = counter.read(Counter::done), counts[1] = counter.read(Counter::failed);
  SPINFLIP_CHECK_MPI(MPI_Bcast(counts, 2, MPI_LONG_LONG, 0, world));
  cat.close();
  if (std::string write_error = agreed_text(worker.write_error, world); !write_error.empty()) {
    throw IoError(write_error + "; the catalogue is whole and resumable: free space, then run the same command again");
  }

  RunResult r;
  {
    RunResult::Seconds mine = worker.times;
    mine.setup = t_farm - t_start;
    mine.farm = farm_seconds;
    mine.tail = t_end - t_left;
    mine.total = t_end - t_start;
    double v[8] = {mine.setup, mine.generator, mine.instrument, mine.kernels, mine.catalogue, mine.farm, mine.tail,
                   mine.total};
    SPINFLIP_CHECK_MPI(MPI_Allreduce(MPI_IN_PLACE, v, 8, MPI_DOUBLE, MPI_SUM, world));
    r.seconds = {v[0], v[1], v[2], v[3], v[4], v[5], v[6], v[7]};
  }
  r.total = statuses.size();
  r.ran = static_cast<std::size_t>(counts[0] + counts[1]);
  r.done = done0 + static_cast<std::size_t>(counts[0]);
  r.failed = failed0 + static_cast<std::size_t>(counts[1]);
  r.pending = r.total - std::min(r.total, r.done + r.failed);
  r.signal = any_sig;
  r.stopped_early = r.ran < todo.size();
  if (progress) progress->tick(counter, true, r.stopped_early ? "stopped" : "finished");
  counter.free();
  if (wrank == 0) {
    if (r.stopped_early)
      log::info("stopped early{}{}: {} entries run, {} done, {} failed, {} pending; the catalogue is resumable: run "
                "the same command again to continue",
                any_sig ? " on " : " after --max-entries",
                any_sig == SIGTERM ? "SIGTERM (from the scheduler, or from mpiexec on Ctrl-C)"
                : any_sig          ? signal_name(any_sig)
                                   : std::string(),
                r.ran, r.done, r.failed, r.pending);
    if (r.stopped_early && any_abandoned)
      log::info("entries in progress at the signal were abandoned and stay pending");
    else
      log::info("finished: {} entries run, {} done, {} failed, {} pending of {}", r.ran, r.done, r.failed, r.pending,
                r.total);
    if (r.failed) log::warn("{} entries failed: spinflip status {} lists them", r.failed, output.string());
    const auto& t = r.seconds;
    auto pc = [&](double x) { return t.total > 0 ? 100.0 * x / t.total : 0.0; };
    log::info("rank-seconds {:.2f}: setup {:.1f}%, generator {:.1f}%, instrument {:.1f}%, kernels {:.1f}%, "
              "catalogue {:.2f}%, task farm {:.2f}%, end wait {:.1f}%; {:.3f} entries/s",
              t.total, pc(t.setup), pc(t.generator), pc(t.instrument), pc(t.kernels), pc(t.catalogue), pc(t.farm),
              pc(t.tail), (t_end - t_farm) > 0 ? static_cast<double>(r.ran) / (t_end - t_farm) : 0.0);
  }
  return r;
}

}  // namespace spinflip::campaign
