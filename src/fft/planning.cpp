// Planning rigor, wisdom text and files, and the run-level sharing of one wisdom
// (fft/planning.hpp).
#include "fft/planning.hpp"

#include <fftw3-mpi.h>
#include <fftw3.h>
#include <unistd.h>

#include <cstdlib>
#include <fstream>
#include <mutex>
#include <sstream>

#include "core/checksum.hpp"
#include "core/collective.hpp"
#include "core/config.hpp"
#include "core/errors.hpp"
#include "core/log.hpp"
#include "fft/internal.hpp"

namespace spinflip::fft {

namespace {
using Lock = std::lock_guard<std::recursive_mutex>;

std::string take(char* s) {
  std::string out = s != nullptr ? s : "";
  std::free(s);  // FFTW 3.3.10 allocates the exported text with malloc
  return out;
}

/// A catalogue's folder must exist already: its absence is the catalogue's error to report.
bool beside_folder_exists(const std::filesystem::path& file) {
  const auto dir = file.parent_path();
  return dir.empty() || std::filesystem::is_directory(dir);
}

/// Broadcast a string from root (collective).
std::string bcast(std::string text, int root, MPI_Comm comm) {
  unsigned long long n = text.size();
  SPINFLIP_CHECK_MPI(MPI_Bcast(&n, 1, MPI_UNSIGNED_LONG_LONG, root, comm));
  text.resize(static_cast<std::size_t>(n));
  if (n > 0) SPINFLIP_CHECK_MPI(MPI_Bcast(text.data(), static_cast<int>(n), MPI_CHAR, root, comm));
  return text;
}

/// Import wisdom text (float part, then double part) on top of what there is.
void import_text(const std::string& text, const std::string& origin) {
  if (text.empty()) return;
  // The text is FFTW's float export followed by its double export, each "(fftw-…)".
  const auto second = text.find("(fftw-", 1);
  const std::string f = text.substr(0, second), d = second == std::string::npos ? "" : text.substr(second);
  if (f.find("fftwf_wisdom") == std::string::npos || fftwf_import_wisdom_from_string(f.c_str()) == 0 ||
      (!d.empty() && fftw_import_wisdom_from_string(d.c_str()) == 0))
    throw InputError(origin + ": not FFTW wisdom of this FFTW version (remove the file to plan afresh)");
}
}  // namespace

void set_planning(const Planning& p) {
  Lock lock(detail::planner_mutex());
  detail::state().planning = p;
}
Planning planning() {
  Lock lock(detail::planner_mutex());
  return detail::state().planning;
}

void declare_keys(core::Schema& s) {
  s.add_table("fft", "How FFT plans are made and kept (docs/driver.md, \"FFT plans\").");
  s.add({.path = "fft.planning", .type = core::ValueType::string, .default_value = std::string("measure"),
         .choices = {"estimate", "measure", "patient"},
         .doc = "FFTW planning rigor: measured plans are several times faster at power-of-two shapes and are shared "
                "by every rank through one wisdom; estimate plans at once"});
  s.add({.path = "fft.plan_time_limit_s", .type = core::ValueType::real, .default_value = 60.0, .unit = "s",
         .min = 0.0, .min_exclusive = true, .doc = "FFTW's time limit for planning one transform (measure, patient)"});
  s.add({.path = "fft.wisdom_cache", .type = core::ValueType::string, .default_value = std::string("user"),
         .choices = {"user", "none"},
         .doc = "keep wisdom between runs in $XDG_CACHE_HOME/spinflip/fftw-wisdom (user) or not (none); "
                "a catalogue always keeps its own beside it"});
}

Planning planning_from(const core::Config& c) {
  Planning p;
  const std::string r = c.string("fft.planning");
  p.rigor = r == "estimate" ? Rigor::estimate : r == "patient" ? Rigor::patient : Rigor::measure;
  p.time_limit_s = c.real("fft.plan_time_limit_s");
  return p;
}

std::optional<std::filesystem::path> user_wisdom_cache() {
  if (const char* x = std::getenv("XDG_CACHE_HOME"); x != nullptr && *x == '/')
    return std::filesystem::path(x) / "spinflip" / "fftw-wisdom";
  if (const char* h = std::getenv("HOME"); h != nullptr && *h == '/')
    return std::filesystem::path(h) / ".cache" / "spinflip" / "fftw-wisdom";
  return std::nullopt;
}

std::optional<std::filesystem::path> wisdom_cache_from(const core::Config& c) {
  if (c.string("fft.wisdom_cache") == "none") return std::nullopt;
  return user_wisdom_cache();
}

std::string wisdom_text() {
  Lock lock(detail::planner_mutex());
  return take(fftwf_export_wisdom_to_string()) + take(fftw_export_wisdom_to_string());
}

void use_wisdom(const std::string& text, const std::string& origin) {
  detail::ensure_mpi_init();  // FFTW-MPI's solvers must be known before their wisdom is read
  {
    Lock lock(detail::planner_mutex());
    fftwf_forget_wisdom();
    fftw_forget_wisdom();
    import_text(text, origin);
  }
  detail::forget_cached_plans();
}

void forget_plans() { detail::forget_cached_plans(); }

std::size_t plan_epoch() {
  Lock lock(detail::planner_mutex());
  return detail::state().epoch;
}

void set_wisdom_only(bool on) {
  Lock lock(detail::planner_mutex());
  detail::state().wisdom_only = on;
}

void gather_wisdom(MPI_Comm comm) {
  detail::ensure_mpi_init();
  Lock lock(detail::planner_mutex());
  fftwf_mpi_gather_wisdom(comm);
  fftw_mpi_gather_wisdom(comm);
}

std::vector<PlanRecord> plan_records() {
  Lock lock(detail::planner_mutex());
  return detail::state().records;
}
void clear_plan_records() {
  Lock lock(detail::planner_mutex());
  detail::state().records.clear();
}

std::string read_wisdom_file(const std::filesystem::path& file) {
  std::ifstream in(file, std::ios::binary);
  if (!in) return "";
  std::ostringstream os;
  os << in.rdbuf();
  return os.str();
}

void write_wisdom_file(const std::filesystem::path& file, const std::string& text) {
  namespace fs = std::filesystem;
  std::error_code ec;
  // Unique per process: concurrent runs may write the same cache.
  const fs::path partial = file.string() + ".partial." + std::to_string(::getpid());
  {
    std::ofstream out(partial, std::ios::binary | std::ios::trunc);
    out << text;
    if (!out) throw IoError(file.string() + ": cannot write FFTW wisdom");
  }
  fs::rename(partial, file, ec);
  if (ec) {
    fs::remove(partial, ec);
    throw IoError(file.string() + ": cannot write FFTW wisdom (" + ec.message() + ")");
  }
}

SharedWisdom share_wisdom(MPI_Comm world, const std::optional<std::filesystem::path>& own,
                          const std::optional<std::filesystem::path>& cache, const std::function<void()>& prepare) {
  namespace fs = std::filesystem;
  int rank = 0;
  SPINFLIP_CHECK_MPI(MPI_Comm_rank(world, &rank));
  SharedWisdom shared;
  std::string text;
  int from_own = 0;
  core::run_on_root(world, [&] {
    if (own && fs::exists(*own)) {
      text = read_wisdom_file(*own);
      shared.source = own->string();
      from_own = 1;
    } else if (cache) {
      text = read_wisdom_file(*cache);
      shared.source = text.empty() ? "none" : cache->string();
    } else {
      shared.source = "none";
    }
  });
  SPINFLIP_CHECK_MPI(MPI_Bcast(&from_own, 1, MPI_INT, 0, world));
  text = bcast(std::move(text), 0, world);
  shared.source = bcast(shared.source, 0, world);
  use_wisdom(text, shared.source);

  // A catalogue's own wisdom is used as it is: measuring again could change a plan
  // halfway through a catalogue.
  if (from_own == 0 && planning().rigor != Rigor::estimate) {
    set_wisdom_only(false);
    clear_plan_records();
    const double t0 = MPI_Wtime();
    prepare();
    shared.seconds = MPI_Wtime() - t0;
    shared.made = plan_records();
  }
  set_wisdom_only(true);

  std::string used;
  core::run_on_root(world, [&] {
    bool measured = false;
    for (const auto& r : shared.made) measured = measured || r.how == "measured" || r.how == "patient";
    if (from_own == 1 || !measured) {
      // Nothing new: keep the text as read (FFTW's export of the same wisdom need
      // not be the same text), so runs from one wisdom record one checksum.
      used = text;
      if (own && from_own == 0 && beside_folder_exists(*own)) write_wisdom_file(*own, used);
      return;
    }
    used = wisdom_text();
    if (from_own == 0 && cache && used != text) {
      // Merge with the cache as it is now, its entries winning: runs that measured
      // the same shape at the same time then settle on one plan for later runs.
      const std::string now = read_wisdom_file(*cache);
      if (!now.empty()) {
        Lock lock(detail::planner_mutex());
        try {
          import_text(now, cache->string());
        } catch (const InputError& e) {
          log::warn("fft: {} (replaced)", e.what());
        }
      }
      used = wisdom_text();
      try {
        std::error_code ec;
        fs::create_directories(cache->parent_path(), ec);  // the user cache folder may be new
        write_wisdom_file(*cache, used);
      } catch (const IoError& e) {
        log::warn("fft: wisdom cache not kept: {}", e.what());  // the run itself does not need it
      }
    }
    if (own && beside_folder_exists(*own)) write_wisdom_file(*own, used);
  });
  shared.text = bcast(std::move(used), 0, world);
  use_wisdom(shared.text, "world rank 0's wisdom");
  shared.sha256 = core::sha256_hex(shared.text);
  return shared;
}

}  // namespace spinflip::fft
