// A campaign: the validated campaign file, its varied parameters, the design
// points its [[designs]] blocks make, and the entries (point × realisation).
#pragma once
#include <cstddef>
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

#include "core/config.hpp"
#include "core/rng.hpp"

namespace spinflip::campaign {

enum class Role { training, fiducial, stencil_plus, stencil_minus, list };
std::string role_name(Role r);  // "training", "fiducial", "stencil+", "stencil-", "list"

struct Parameter {
  std::string name;      // [parameters.<name>], the leaf name of a 'can vary' key
  std::string key_path;  // the key it sets, e.g. "sources.ionizing_efficiency"
  std::string unit;
  std::string label;     // for plots
  double min = 0, max = 0, fiducial = 0;
  bool log = false;
  double step = 0.05;    // stencil half-step (fraction of fiducial unless step_absolute)
  bool step_absolute = false;
};

struct DesignPoint {
  std::vector<double> values;  // physical values, one per parameter
  Role role = Role::training;
  int design_index = 0;        // which [[designs]] block
  int stencil_param = -1;      // parameter a stencil point moves
  double stencil_step = 0.0;   // signed physical offset applied
  int stencil_step_index = -1; // which step size of the design
  std::size_t seed_point = 0;  // point whose realisation seeds this point uses
};

struct Entry {
  std::size_t point = 0;
  std::size_t realisation = 0;
};

/// One [[designs]] block as made: its points are [first_point, first_point + points).
struct DesignSummary {
  std::string kind, name;
  std::size_t first_point = 0, points = 0, realisations = 1;
  std::size_t entries() const { return points * realisations; }
};

class Campaign {
 public:
  /// Parse and validate the file and every design; ConfigError on any problem.
  static Campaign load(const std::filesystem::path& file);
  static Campaign from_string(std::string text, std::string source_name);
  /// Same against another schema (tests with their own 'can vary' keys).
  static Campaign from_string(std::string text, std::string source_name, const core::Schema& schema);

  const core::Config& config() const;
  const std::vector<Parameter>& parameters() const;
  const std::vector<DesignPoint>& points() const;
  const std::vector<Entry>& entries() const;
  const std::vector<DesignSummary>& designs() const;

  /// The campaign's configuration with point `i`'s parameter values applied.
  core::Config config_for_point(std::size_t point) const;
  /// Counter-RNG key of an entry: (seed, seed_point, realisation) — stencil
  /// points share the fiducial's seeds (DESIGN.md §3).
  rng::EntryKey entry_key(const Entry& entry) const;
  /// sha256 of the normalised campaign text: a catalogue's identity for resume.
  /// With list designs, the bytes of their CSV files follow the text in the hash,
  /// so an edited point list is a different campaign (docs/campaign.md).
  std::string sha256() const;
  std::filesystem::path output_path() const;

  Campaign(const Campaign&);
  Campaign(Campaign&&) noexcept;
  Campaign& operator=(Campaign&&) noexcept;
  ~Campaign();

 private:
  struct Impl;
  explicit Campaign(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace spinflip::campaign
