// How plans are made and how every rank comes to run the same plan (DESIGN.md §3,
// §11; docs/driver.md "FFT plans"). Measured plans are several times faster than
// FFTW_ESTIMATE ones at power-of-two shapes, but a measurement depends on timing:
// two ranks measuring alone may pick different algorithms and round differently.
// So one rank measures, its wisdom is shared with every rank before any plan of a
// run is made, and from then on plans come only from that wisdom.
#pragma once
#include <mpi.h>

#include <cstddef>
#include <filesystem>
#include <functional>
#include <optional>
#include <string>
#include <vector>

namespace spinflip::core {
class Config;
class Schema;
}  // namespace spinflip::core

namespace spinflip::fft {

enum class Rigor { estimate, measure, patient };

struct Planning {
  Rigor rigor = Rigor::estimate;  // library default; campaigns and the CLI set [fft] planning (measure)
  double time_limit_s = 60;       // FFTW's limit on planning one transform (measure, patient)
};
void set_planning(const Planning& p);
Planning planning();

/// [fft] planning, plan_time_limit_s, wisdom_cache.
void declare_keys(core::Schema& s);
Planning planning_from(const core::Config& c);
/// The wisdom kept between runs ([fft] wisdom_cache = "user"): $XDG_CACHE_HOME/spinflip/fftw-wisdom,
/// else $HOME/.cache/spinflip/fftw-wisdom; none when the key is "none" or no folder is known.
std::optional<std::filesystem::path> wisdom_cache_from(const core::Config& c);
std::optional<std::filesystem::path> user_wisdom_cache();

/// This process's wisdom (float and double planners) as one text.
std::string wisdom_text();
/// Replace this process's wisdom by `text` (empty: none) and forget every cached plan
/// (a plan a caller still holds stays valid). InputError naming `origin` if it is not wisdom.
void use_wisdom(const std::string& text, const std::string& origin);
/// Forget every cached plan (wisdom stays); plan_epoch() then increases.
void forget_plans();
/// Increases whenever cached plans are forgotten: holders of long-lived plans
/// (SlabField work storage) re-plan when it changed.
std::size_t plan_epoch();
/// Plan only from wisdom: a transform the wisdom lacks is planned with FFTW_ESTIMATE,
/// which does not depend on timing, so every rank still makes the same plan.
void set_wisdom_only(bool on);
/// Gather the wisdom of every rank of comm onto its rank 0 (collective; FFTW-MPI).
void gather_wisdom(MPI_Comm comm);

/// Plans made by this process since the last clear_plan_records().
struct PlanRecord {
  std::string problem;  // "r2c 3D 256x256x1024 in place", ...
  double seconds = 0;   // planning time
  std::string how;      // "measured", "patient", "from wisdom", "estimate", "estimate (not in wisdom)"
};
std::vector<PlanRecord> plan_records();
void clear_plan_records();

/// Wisdom files: "" if the file does not exist; written as <path>.partial + rename.
std::string read_wisdom_file(const std::filesystem::path& file);
void write_wisdom_file(const std::filesystem::path& file, const std::string& text);

/// The wisdom a run used.
struct SharedWisdom {
  std::string text, sha256;
  std::string source;              // the file it was read from, or "none"
  std::vector<PlanRecord> made;    // plans made while preparing (on world rank 0)
  double seconds = 0;              // preparation time on world rank 0
};

/// Collective on world. World rank 0 reads `own` if it exists (a resumed catalogue
/// keeps its wisdom), else `cache`, and every rank uses it. Then every rank calls
/// prepare() with measured planning (rigor from planning()): it makes the plans a
/// run will need, serial ones on world rank 0 only and distributed ones together
/// (gathering their wisdom onto world rank 0); plans missing from the wisdom are
/// measured. World rank 0's wisdom then goes to every rank, and to `own` and
/// `cache` (merged with the cache as it is now, whose entries win, so concurrent
/// runs settle on one plan per shape); afterwards plans come only from it.
SharedWisdom share_wisdom(MPI_Comm world, const std::optional<std::filesystem::path>& own,
                          const std::optional<std::filesystem::path>& cache, const std::function<void()>& prepare);

}  // namespace spinflip::fft
