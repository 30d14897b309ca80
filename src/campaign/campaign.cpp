#include "campaign/campaign.hpp"

#include <algorithm>
#include <cmath>
#include <fstream>
#include <sstream>

#include "campaign/designs.hpp"
#include "campaign/schema.hpp"
#include "core/checksum.hpp"
#include "core/errors.hpp"
#ifdef SPINFLIP_HAVE_INGEST
#include "ingest/ingest.hpp"
#endif

namespace spinflip::campaign {

std::string role_name(Role r) {
  switch (r) {
    case Role::training: return "training";
    case Role::fiducial: return "fiducial";
    case Role::stencil_plus: return "stencil+";
    case Role::stencil_minus: return "stencil-";
    case Role::list: return "list";
  }
  return "?";
}

struct Campaign::Impl {
  core::Config config;
  std::vector<Parameter> parameters;
  std::vector<DesignPoint> points;
  std::vector<Entry> entries;
  std::vector<DesignSummary> designs;
  std::string sha256;
};

namespace {

std::string number_text(double v) {
  std::ostringstream os;
  os.precision(10);
  os << v;
  return os.str();
}

std::vector<Parameter> read_parameters(const core::Config& cfg) {
  const core::Schema& schema = cfg.schema();
  std::vector<Parameter> out;
  for (const auto& name : cfg.table_names("parameters")) {
    const std::string t = "parameters." + name;
    const core::KeySpec* spec = schema.find_varying(name);
    if (!spec || spec->path.find('*') != std::string::npos) {
      std::string allowed;
      for (const auto& k : schema.keys())
        if (k.can_vary && k.path.find('*') == std::string::npos)
          allowed += (allowed.empty() ? "" : ", ") + k.path.substr(k.path.rfind('.') + 1);
      throw ConfigError(cfg.location(t) + ": [" + t + "]: \"" + name +
                        "\" is not a key that can vary: allowed " + (allowed.empty() ? "(none in this build)" : allowed));
    }
    Parameter p;
    p.name = name;
    p.key_path = spec->path;
    p.unit = spec->unit;
    p.label = cfg.string(t + ".label");
    if (p.label.empty()) p.label = name;
    p.min = cfg.real(t + ".min");
    p.max = cfg.real(t + ".max");
    p.fiducial = cfg.real(t + ".fiducial");
    p.log = cfg.boolean(t + ".log");
    p.step = cfg.real(t + ".step");
    p.step_absolute = cfg.boolean(t + ".step_absolute");
    if (!(p.max > p.min))
      cfg.fail(t + ".max", "must be above " + t + ".min = " + number_text(p.min) + " (bounds inverted or equal)");
    if (p.fiducial < p.min || p.fiducial > p.max)
      cfg.fail(t + ".fiducial", "is outside the design range [" + number_text(p.min) + ", " + number_text(p.max) + "]");
    if (p.log && !(p.min > 0))
      cfg.fail(t + ".min", "log = true needs min > 0 (the design is uniform in log10)");
    // The whole range must be values the key accepts.
    for (const char* leaf : {"min", "max"}) {
      const double v = leaf[1] == 'i' ? p.min : p.max;
      bool low = spec->min && (spec->min_exclusive ? v <= *spec->min : v < *spec->min);
      bool high = spec->max && v > *spec->max;
      if (low || high) cfg.fail(t + "." + leaf, "is outside what " + p.key_path + " allows: " + spec->allowed_text());
    }
    out.push_back(std::move(p));
  }
  return out;
}

std::string file_bytes(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream os;
  os << in.rdbuf();
  return os.str();
}

}  // namespace

Campaign::Campaign(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
Campaign::Campaign(const Campaign& o) : impl_(std::make_unique<Impl>(*o.impl_)) {}
Campaign::Campaign(Campaign&&) noexcept = default;
Campaign& Campaign::operator=(Campaign&&) noexcept = default;
Campaign::~Campaign() = default;

Campaign Campaign::load(const std::filesystem::path& file) {
  std::ifstream in(file, std::ios::binary);
  if (!in) throw ConfigError(file.string() + ": cannot open the campaign file (does it exist and is it readable?)");
  std::ostringstream buffer;
  buffer << in.rdbuf();
  return from_string(buffer.str(), file.string());
}

Campaign Campaign::from_string(std::string text, std::string source_name) {
  return from_string(std::move(text), std::move(source_name), campaign_schema());
}

Campaign Campaign::from_string(std::string text, std::string source_name, const core::Schema& schema) {
  core::Config cfg = core::Config::from_string(std::move(text), std::move(source_name), schema);
  auto impl = std::unique_ptr<Impl>(new Impl{cfg, {}, {}, {}, {}, {}});
  impl->parameters = read_parameters(cfg);

  const std::size_t n_blocks = cfg.array_size("designs");
  if (cfg.has_table("ingest")) {
#ifdef SPINFLIP_HAVE_INGEST
    // The manifest is the design: its rows are the points and realisations (docs/ingest.md).
    if (n_blocks > 0)
      throw ConfigError(cfg.location("designs") + ": [[designs]]: a campaign with an [ingest] table takes its "
                        "points from the manifest (ingest.manifest); remove the [[designs]] blocks");
    auto m = ingest::manifest_from(cfg);
    ingest::throw_if_problems(m.problems);
    std::string hashed = cfg.normalised_text() + "\n# ingest.manifest\n" + file_bytes(m.source);
    const auto mpoints = ingest::points_of(m);
    const std::vector<double>* fiducial = nullptr;
    std::size_t fiducial_index = 0;
    for (std::size_t i = 0; i < mpoints.size(); ++i)
      if (mpoints[i].role == "fiducial") {
        fiducial = &mpoints[i].values, fiducial_index = i;
        break;
      }
    std::size_t max_real = 0;
    for (const auto& mp : mpoints) {
      DesignPoint p;
      p.values = mp.values;
      p.role = mp.role == "training"   ? Role::training
               : mp.role == "fiducial" ? Role::fiducial
               : mp.role == "stencil+" ? Role::stencil_plus
               : mp.role == "stencil-" ? Role::stencil_minus
                                       : Role::list;
      const std::size_t point = impl->points.size();
      p.seed_point = point;
      if ((p.role == Role::stencil_plus || p.role == Role::stencil_minus) && fiducial) {
        p.seed_point = fiducial_index;  // noise seeds as a generated stencil's (DESIGN.md §3)
        for (std::size_t j = 0; j < p.values.size(); ++j)
          if (p.values[j] != (*fiducial)[j]) {
            p.stencil_param = static_cast<int>(j);
            p.stencil_step = p.values[j] - (*fiducial)[j];
            break;
          }
      }
      for (const auto& rr : mp.realisations) {
        impl->entries.push_back({point, rr.first});
        max_real = std::max(max_real, rr.first + 1);
      }
      impl->points.push_back(std::move(p));
    }
    // Ragged: points may have different realisation counts; `realisations` is the largest.
    impl->designs.push_back({"ingest", m.source.filename().string(), 0, impl->points.size(), max_real});
    impl->sha256 = core::sha256_hex(hashed);
    return Campaign(std::move(impl));
#else
    throw ConfigError(cfg.location("ingest") + ": [ingest]: this build has no ingest module");
#endif
  }
  if (n_blocks == 0)
    throw ConfigError(cfg.source_name() + ": no [[designs]] block: a campaign needs at least one "
                      "(kind = latin_hypercube, sobol, grid, fiducial, stencil or list)");
  std::string hashed = cfg.normalised_text();
  std::int64_t fiducial_point = -1;
  for (std::size_t b = 0; b < n_blocks; ++b) {
    const std::string kind_key = "designs." + std::to_string(b) + ".kind";
    if (cfg.string(kind_key) == "fiducial" && fiducial_point >= 0)
      cfg.fail(kind_key, "a campaign has one fiducial design (give it more realisations instead)");
    DesignBlock block = build_design(cfg, b, impl->parameters, fiducial_point, impl->points.size());
    DesignSummary summary{block.kind, block.name, impl->points.size(), block.points.size(), block.realisations};
    if (block.kind == "fiducial") fiducial_point = static_cast<std::int64_t>(impl->points.size());
    if (block.kind == "list") {
      std::filesystem::path path(cfg.string("designs." + std::to_string(b) + ".file"));
      if (path.is_relative()) path = cfg.directory() / path;
      hashed += "\n# designs." + std::to_string(b) + ".file\n" + file_bytes(path);
    }
    for (auto& p : block.points) {
      const std::size_t point = impl->points.size();
      for (std::size_t r = 0; r < block.realisations; ++r) impl->entries.push_back({point, r});
      impl->points.push_back(std::move(p));
    }
    impl->designs.push_back(std::move(summary));
  }
  impl->sha256 = core::sha256_hex(hashed);
  return Campaign(std::move(impl));
}

const core::Config& Campaign::config() const { return impl_->config; }
const std::vector<Parameter>& Campaign::parameters() const { return impl_->parameters; }
const std::vector<DesignPoint>& Campaign::points() const { return impl_->points; }
const std::vector<Entry>& Campaign::entries() const { return impl_->entries; }
const std::vector<DesignSummary>& Campaign::designs() const { return impl_->designs; }

core::Config Campaign::config_for_point(std::size_t point) const {
  if (point >= impl_->points.size())
    throw InternalError("config_for_point: point " + std::to_string(point) + " of " +
                        std::to_string(impl_->points.size()));
  core::Config c = impl_->config;
  const auto& v = impl_->points[point].values;
  for (std::size_t j = 0; j < impl_->parameters.size(); ++j)
    c.set_real(impl_->parameters[j].key_path, v[j], core::Origin::command_line);
  return c;
}

rng::EntryKey Campaign::entry_key(const Entry& e) const {
  if (e.point >= impl_->points.size()) throw InternalError("entry_key: point out of range");
  return {static_cast<std::uint64_t>(impl_->config.integer("campaign.seed")),
          static_cast<std::uint64_t>(impl_->points[e.point].seed_point), static_cast<std::uint64_t>(e.realisation)};
}

std::string Campaign::sha256() const { return impl_->sha256; }
std::filesystem::path Campaign::output_path() const { return impl_->config.string("campaign.output"); }

}  // namespace spinflip::campaign
