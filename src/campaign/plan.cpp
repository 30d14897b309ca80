#include "campaign/plan.hpp"

#include <algorithm>
#include <cmath>
#include <fstream>
#include <sstream>

#include "core/errors.hpp"
#ifdef SPINFLIP_HAVE_COSMO
#include "cosmo/cosmology.hpp"
#endif
#ifdef SPINFLIP_HAVE_SIM
#include "sim/cosmic_dawn.hpp"
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

namespace {

constexpr double GB = 1e9;
constexpr double float_bytes = 4.0;

std::string fmt(double v, int precision = 4) {
  std::ostringstream os;
  os.precision(precision);
  os << v;
  return os.str();
}

// The fiducial design's point, or point 0 (whose values are in range) without one.
std::size_t fiducial_point(const Campaign& c) {
  for (std::size_t i = 0; i < c.points().size(); ++i)
    if (c.points()[i].role == Role::fiducial) return i;
  return 0;
}

std::string mb(double bytes) { return fmt(bytes / 1e6, 4) + " MB"; }

std::string csv_number(double v) {
  std::ostringstream os;
  os.precision(17);
  os << v;
  return os.str();
}

}  // namespace

double MemoryEstimate::peak() const {
  return overhead + persistent + std::max({generator, generator_kept + instrument, generator_kept + kernels});
}

// Buffers counted from src/sim/lightcone.cpp (generate_cone), src/instrument/instrument.cpp
// (Scenario::apply, grid_coverage) and the driver's flow (gather the δT_b slabs into a whole
// cone, copy it per scenario, cut slices and chunks). Slab parts are divided by the group.
MemoryEstimate estimate_memory(const core::Config& cfg, std::size_t chunk_cells, std::size_t group_size) {
  MemoryEstimate m;
  m.overhead = 64e6;  // executable, MPI, HDF5 and FFTW state (an allowance, not measured)
  m.group_size = group_size > 0 ? group_size : static_cast<std::size_t>(cfg.integer("campaign.group_size"));
#ifdef SPINFLIP_HAVE_SIM
  m.n_perp = static_cast<std::size_t>(cfg.integer("cone.n_perp"));
  m.n_los = static_cast<std::size_t>(cfg.integer("cone.n_los"));
  const double np = static_cast<double>(m.n_perp), nl = static_cast<double>(m.n_los);
  const double g = static_cast<double>(m.group_size);
  const double cone = np * np * nl * float_bytes;               // one whole cone of floats
  const double slab_rows = std::ceil(np / g);                    // axis-0 rows of the largest slab
  const double slab = slab_rows * np * nl * float_bytes;         // Array3 slab
  const double half = std::floor(nl / 2) + 1;
  const double padded_slab = slab_rows * np * 2 * half * float_bytes;  // in-place r2c SlabField

  // Generator: the Fourier field `lin` and its work SlabFields (one without reionization, two
  // smoothed radii at a time with it, three with the Zel'dovich option), the δT_b slab and, with reionization, a 1-byte ionized
  // flag per cell, the 2-byte |k| bin of every local half-spectrum mode (ModeBins) and the gains
  // of a pair of radii (3 × 65536 floats). On a one-rank group the fields, flags and bins are kept
  // between cones (sim/lightcone.cpp, WorkStorage), so they stay during the other phases too.
  const bool reionization = cfg.boolean("sources.reionization");
  double work_fields = reionization ? std::min<double>(2, static_cast<double>(cfg.integer("sources.n_radii"))) : 1;
  // The Zel'dovich option moves the density with three displacement components at once (its
  // ghost planes, a few per side on rank groups, are not counted).
  if (cfg.boolean("cone.zeldovich_displacement")) work_fields = 3;
  double storage = (1 + work_fields) * padded_slab;
  const bool spin = cfg.boolean("spin_temperature.enabled");
  if (reionization) storage += slab_rows * np * nl;
  if (reionization || spin) storage += slab_rows * np * half * 2.0;  // |k| bins
  m.generator = storage + slab + (reionization ? 3 * 65536 * float_bytes : 0.0);
  // Spin temperature (sim/cosmic_dawn.cpp): T_K, x_e, J_α, δ and the heating and ionization sums
  // at two redshift nodes, 8 floats per cell of the slab, and the shell window's gains.
  if (spin) m.generator += 8 * slab + 3 * 65536 * float_bytes;
  m.generator_kept = m.group_size == 1 ? storage : 0.0;

#ifdef SPINFLIP_HAVE_INSTRUMENT
  // Scenarios: one observing-time table per LOS cell and transverse Fourier cell (n_los × n_perp²
  // floats) for every scenario with an array; built once and kept.
  std::size_t with_array = 0;
  for (const auto& name : cfg.table_names("scenarios"))
    if (cfg.string("scenarios." + name + ".array") != "none") ++with_array;
  m.persistent = static_cast<double>(with_array) * cone;
#endif

  // Instrument: the gathered clean cone (the driver frees the δT_b slab once gathered; while
  // gathering, slab + cone is below the generator's peak), the observed copy and the transverse
  // r2c spectrum of the whole cone (n_perp × (n_perp/2+1) × n_los complex floats).
  const double spectrum = np * (std::floor(np / 2) + 1) * nl * 2 * float_bytes;
  m.instrument = std::max(slab + cone, 2 * cone + spectrum);

  // Kernels: clean + observed cone, one chunk copy and its r2c transform.
  const double cc = chunk_cells > 0 ? static_cast<double>(chunk_cells) : nl;
  m.kernels = 2 * cone + np * np * cc * float_bytes + np * np * (std::floor(cc / 2) + 1) * 2 * float_bytes;
#else
  (void)chunk_cells;
#endif
  return m;
}

double node_available_gb() {
  std::ifstream in("/proc/meminfo");
  std::string key;
  double value = 0;
  std::string unit;
  while (in >> key >> value >> unit)
    if (key == "MemAvailable:") return value * 1024.0 / GB;  // kB
  return 0;
}

std::string points_csv(const Campaign& c) {
  std::ostringstream os;
  os << "point,design,role,seed_point";
  for (const auto& p : c.parameters()) os << "," << p.name;
  os << "\n";
  const auto& pts = c.points();
  for (std::size_t i = 0; i < pts.size(); ++i) {
    os << i << "," << pts[i].design_index << "," << role_name(pts[i].role) << "," << pts[i].seed_point;
    for (double v : pts[i].values) os << "," << csv_number(v);
    os << "\n";
  }
  return os.str();
}

PlanReport plan(const Campaign& c, const PlanOptions& options) {
  PlanReport r;
  const core::Config& cfg = c.config();
  auto say = [&](std::string s) { r.lines.push_back(std::move(s)); };
  // A check that throws a user error becomes one problem line; the rest still run.
  auto attempt = [&](auto&& fn) {
    try {
      fn();
    } catch (const ConfigError& e) {
      r.problems.emplace_back(e.what());
    } catch (const InputError& e) {
      r.problems.emplace_back(e.what());
    } catch (const IoError& e) {
      r.problems.emplace_back(e.what());
    } catch (const ModelError& e) {
      r.problems.emplace_back(e.what());
    }
  };

  say("campaign \"" + cfg.string("campaign.name") + "\" (" + cfg.source_name() + "), seed " +
      std::to_string(cfg.integer("campaign.seed")) + ", sha256 " + c.sha256().substr(0, 16) + "…");
  say("catalogue: " + c.output_path().string());
  say("parameters (" + std::to_string(c.parameters().size()) + "):");
  for (const auto& p : c.parameters())
    say("  " + p.name + " → " + p.key_path + "  [" + fmt(p.min, 6) + ", " + fmt(p.max, 6) + "]" +
        (p.log ? " log" : " linear") + ", fiducial " + fmt(p.fiducial, 6) + ", step " + fmt(p.step, 4) +
        (p.step_absolute ? " (absolute)" : " (relative)") + (p.unit.empty() ? "" : ", " + p.unit));
  say("designs:");
  for (std::size_t b = 0; b < c.designs().size(); ++b) {
    const auto& d = c.designs()[b];
    std::string extra;
    const std::string k = "designs." + std::to_string(b) + ".";
    if (d.kind == "sobol" || d.kind == "latin_hypercube")
      extra = cfg.boolean(k + "scramble") ? ", scrambled" : ", unscrambled";
    if (d.kind == "sobol" && (d.points & (d.points - 1)) != 0)
      r.warnings.push_back(cfg.location(k + "points") + ": " + k + "points = " + std::to_string(d.points) +
                           " is not a power of 2: a Sobol design keeps its balance only at powers of 2");
    if (d.kind == "list") extra = ", from " + cfg.string(k + "file");
    if (d.kind == "ingest") {  // ragged: points may hold different numbers of realisations
      say("  [" + std::to_string(b) + "] ingest \"" + d.name + "\": " + std::to_string(d.points) + " points, " +
          std::to_string(c.entries().size()) + " entries (cone files, up to " + std::to_string(d.realisations) +
          " realisations a point)");
      continue;
    }
    say("  [" + std::to_string(b) + "] " + d.kind + (d.name != d.kind ? " \"" + d.name + "\"" : "") + ": " +
        std::to_string(d.points) + " points × " + std::to_string(d.realisations) + " realisations = " +
        std::to_string(d.entries()) + " entries" + extra);
  }
#ifdef SPINFLIP_HAVE_INGEST
  if (cfg.has_table("ingest"))
    attempt([&] {
      for (auto& line : ingest::check_campaign(cfg, options.scan)) r.problems.push_back(std::move(line));
    });
#endif
  // Stencil realisations beyond the fiducial's have no fiducial entry to difference against.
  std::size_t fid_real = 0;
  for (const auto& d : c.designs())
    if (d.kind == "fiducial") fid_real = d.realisations;
  for (std::size_t b = 0; b < c.designs().size(); ++b)
    if (c.designs()[b].kind == "stencil" && c.designs()[b].realisations > fid_real) {
      const std::string k = "designs." + std::to_string(b) + ".realisations";
      r.warnings.push_back(cfg.location(k) + ": " + k + " = " + std::to_string(c.designs()[b].realisations) +
                           " exceeds the fiducial's " + std::to_string(fid_real) +
                           ": the extra stencil realisations have no fiducial entry with the same seeds");
    }
  say("entries: " + std::to_string(c.entries().size()) + " (points × realisations, " +
      std::to_string(c.points().size()) + " points)");

  // Every parameter's extremes and the fiducial must make a cone the generator accepts: a
  // bound that does not is a design that fails entries, not a run worth starting.
#if defined(SPINFLIP_HAVE_SIM) && defined(SPINFLIP_HAVE_COSMO)
  {
    const std::size_t fid = fiducial_point(c);
    std::vector<std::pair<std::string, core::Config>> probes;
    probes.emplace_back("", c.config_for_point(fid));
    for (const auto& p : c.parameters())
      for (double v : {p.min, p.max}) {
        core::Config k = c.config_for_point(fid);
        k.set_real(p.key_path, v, core::Origin::command_line);
        probes.emplace_back("parameters." + p.name + (v == p.min ? ".min" : ".max"), std::move(k));
      }
    for (auto& [key, probe] : probes)
      attempt([&, &key = key, &probe = probe] {
        try {
          (void)sim::settings_from(probe);
        } catch (const ConfigError& e) {
          if (key.empty()) throw;
          throw ConfigError(cfg.location(key) + ": " + key + ": the cone cannot be made at this bound: " + e.what());
        }
      });
  }
#endif

  MemoryEstimate mem = estimate_memory(cfg, 0, options.group_size);
  const double np = static_cast<double>(mem.n_perp);

#if defined(SPINFLIP_HAVE_COSMO) && defined(SPINFLIP_HAVE_INSTRUMENT) && defined(SPINFLIP_HAVE_SIM)
  attempt([&] {
    const core::Config fid_cfg = c.config_for_point(fiducial_point(c));
    const cosmo::Cosmology cosmology(cosmo::parameters_from(fid_cfg));
    instrument::ConeGeometry geo;
    geo.shape = {mem.n_perp, mem.n_perp, mem.n_los};
    geo.cell_mpc = cfg.real("cone.cell_mpc");
    const double d_near = cosmology.comoving_distance_mpc(cfg.real("cone.z_min"));
    for (std::size_t k = 0; k < mem.n_los; ++k) {  // cell centres, as generate_cone places them
      geo.distance_mpc.push_back(d_near + (static_cast<double>(k) + 0.5) * geo.cell_mpc);
      geo.z.push_back(cosmology.redshift_at_comoving_distance(geo.distance_mpc.back()));
      geo.freq_MHz.push_back(cosmo::frequency_MHz(geo.z.back()));
    }
    // Channel width of each LOS cell: the frequency span of its comoving extent.
    double chan_max = 0, chan_min = 1e300;
    for (std::size_t k = 0; k < mem.n_los; ++k) {
      const double a = cosmo::frequency_MHz(cosmology.redshift_at_comoving_distance(d_near + static_cast<double>(k) * geo.cell_mpc));
      const double b = cosmo::frequency_MHz(cosmology.redshift_at_comoving_distance(d_near + static_cast<double>(k + 1) * geo.cell_mpc));
      chan_max = std::max(chan_max, a - b);
      chan_min = std::min(chan_min, a - b);
    }
    say("cone: " + fmt(np) + " × " + fmt(np) + " × " + std::to_string(mem.n_los) + " cells of " +
        fmt(geo.cell_mpc) + " Mpc; z " + fmt(geo.z.front(), 4) + "–" + fmt(geo.z.back(), 4) + ", ν " +
        fmt(geo.freq_MHz.back(), 5) + "–" + fmt(geo.freq_MHz.front(), 5) + " MHz; channel width " +
        fmt(chan_min * 1e3, 4) + "–" + fmt(chan_max * 1e3, 4) + " kHz");

    {  // FFTs of one cone (bench_sim's reference counts the same): the initial conditions' forward
       // transform, the density and velocity inverses, one per excursion-set radius and, with the
       // spin temperature, the first shell once and the others at every redshift node (an upper
       // bound: shells whose sources have not switched on yet are skipped).
      const sim::ConeSettings s = sim::settings_from(fid_cfg);
      std::size_t n = 1 + (s.zeldovich_displacement ? 3 : 1) + (s.velocity_gradient ? 1 : 0) + (s.reionization ? s.n_radii : 0);
      std::string dawn;
      if (s.spin.enabled) {
        const std::size_t nodes = sim::detail::dawn_redshift_nodes(s, geo.z.front()).size() - 1;
        const std::size_t shells = nodes * (s.spin.n_shells - 1) + 1;
        n += shells;
        dawn = " (" + std::to_string(shells) + " for the spin temperature: " + std::to_string(nodes) +
               " redshift steps × " + std::to_string(s.spin.n_shells - 1) + " shells + 1)";
      }
      say("transforms per cone: at most " + std::to_string(n) + dawn);
    }

    const double cadence = cfg.real("slices.cadence_MHz"), width = cfg.real("slices.width_MHz");
    if (cadence < chan_max)
      r.problems.push_back(cfg.location("slices.cadence_MHz") + ": slices.cadence_MHz = " + fmt(cadence) +
                           " is finer than the cone's channel width (up to " + fmt(chan_max * 1e3, 4) +
                           " kHz at the near end): successive slices would repeat a cell (allowed: cadence ≥ " +
                           fmt(chan_max, 4) + " MHz, or a smaller cone.cell_mpc)");
    if (cadence < width)
      r.problems.push_back(cfg.location("slices.cadence_MHz") + ": slices.cadence_MHz = " + fmt(cadence) +
                           " is finer than slices.width_MHz = " + fmt(width) +
                           ": slices would overlap (allowed: cadence ≥ width)");
    if (width < chan_min)
      r.warnings.push_back(cfg.location("slices.width_MHz") + ": slices.width_MHz = " + fmt(width) +
                           " is narrower than one channel (" + fmt(chan_min * 1e3, 4) +
                           " kHz): each slice is the single nearest cell");
    std::vector<instrument::Unit> slices, chunks;
    if (cadence >= width) slices = instrument::slice_units(cfg, geo);
    attempt([&] { chunks = instrument::chunk_units(cfg, geo); });
    if (!chunks.empty()) mem = estimate_memory(cfg, chunks.front().los_end - chunks.front().los_begin, options.group_size);
    say("units: " + std::to_string(slices.size()) + " slices every " + fmt(cadence) + " MHz (width " + fmt(width) +
        " MHz), " + std::to_string(chunks.size()) + " chunks of " + fmt(cfg.real("chunks.bandwidth_MHz")) +
        " MHz" +
        (chunks.empty() ? "" : " (" + std::to_string(chunks.front().los_end - chunks.front().los_begin) + " cells)"));

    // Scenarios: arrays, CSV files, noise and wedge settings are checked as they are built.
    std::vector<instrument::Settings> scen;
    attempt([&] { scen = instrument::scenario_settings_from(fid_cfg, cosmology, geo); });
    for (const auto& st : scen) {
      say("scenario " + st.name + ": array " + st.array + (st.noise ? ", noise " + fmt(st.observing_hours) + " h" : ", no noise") +
          (st.wedge ? ", wedge " + fmt(st.wedge_angle_deg) + "°" : ", no wedge"));
    }
    if (cfg.table_names("scenarios").empty())
      r.warnings.push_back(cfg.source_name() + ": no [scenarios.<name>] table: nothing will be measured");

#ifdef SPINFLIP_HAVE_STATS
    // Kernels: each checks the unit it would measure. Scattering is named here too, since its
    // largest wavelet must fit the slice.
    if (cfg.has_table("stats.scattering")) {
      const auto J = cfg.integer("stats.scattering.scales");
      if (std::ldexp(1.0, static_cast<int>(J)) > np)
        r.problems.push_back(cfg.location("stats.scattering.scales") + ": stats.scattering.scales = " +
                             std::to_string(J) + ": the largest wavelet (2^" + std::to_string(J) + " = " +
                             fmt(std::ldexp(1.0, static_cast<int>(J))) + " pixels) does not fit the " + fmt(np) +
                             "-pixel slice (cone.n_perp); allowed scales ≤ " +
                             std::to_string(static_cast<int>(std::floor(std::log2(np)))));
    }
    std::vector<std::unique_ptr<stats::Kernel>> kernels;
    attempt([&] { kernels = stats::kernels_from(cfg); });
    std::string names;
    for (const auto& k : kernels) {
      names += (names.empty() ? "" : ", ") + k->name();
      stats::Geometry ug;
      if (k->unit_kind() == stats::UnitKind::slice) {
        if (slices.empty()) continue;
        ug.shape = {mem.n_perp, mem.n_perp};
        ug.cell_mpc = {geo.cell_mpc, geo.cell_mpc, 0.0};
      } else {
        if (chunks.empty()) continue;
        ug.shape = {mem.n_perp, mem.n_perp, chunks.front().los_end - chunks.front().los_begin};
        ug.cell_mpc = {geo.cell_mpc, geo.cell_mpc, geo.cell_mpc};
      }
      try {
        k->check(ug);
        const std::size_t units = k->unit_kind() == stats::UnitKind::slice ? slices.size() : chunks.size();
        say("kernel " + k->name() + ": " + std::to_string(k->n_coeff(ug)) + " coefficients × " +
            std::to_string(units) + (k->unit_kind() == stats::UnitKind::slice ? " slices" : " chunks"));
      } catch (const Error& e) {
        if (e.exit_status() != 2) throw;
        if (k->name() == "scattering" && !r.problems.empty() &&
            r.problems.back().find("stats.scattering.scales") != std::string::npos)
          continue;  // already said in terms of the key
        r.problems.push_back(cfg.location("stats." + k->name()) + ": [stats." + k->name() + "]: " + e.what());
      }
    }
    if (kernels.empty()) r.warnings.push_back(cfg.source_name() + ": no [stats.<kernel>] table: nothing will be measured");
#endif
  });
#endif

  // Memory: per rank, against the command line's limit, the campaign's, or the node's share.
  const double peak = mem.peak();
  say("memory per rank (group size " + std::to_string(mem.group_size) + "): generator " + mb(mem.generator) +
      ", instrument " + mb(mem.instrument) + ", kernels " + mb(mem.kernels) + ", scenario tables " +
      mb(mem.persistent) + ", generator storage kept between cones " + mb(mem.generator_kept) + ", fixed " +
      mb(mem.overhead) + "; peak " + mb(peak));
  double limit_gb = 0;
  std::string limit_from;
  if (options.memory_limit_gb > 0) {
    limit_gb = options.memory_limit_gb;
    limit_from = "--memory-limit-gb";
  } else if (cfg.real("campaign.memory_limit_gb") > 0) {
    limit_gb = cfg.real("campaign.memory_limit_gb");
    limit_from = "campaign.memory_limit_gb";
  } else if (double avail = node_available_gb(); avail > 0) {
    limit_gb = avail / std::max(1, options.ranks_per_node);
    limit_from = "the node's MemAvailable / " + std::to_string(std::max(1, options.ranks_per_node)) + " ranks";
  }
  if (limit_gb > 0) {
    say("memory limit: " + fmt(limit_gb) + " GB per rank (" + limit_from + ")");
    if (peak > limit_gb * GB) {
      const std::string where = limit_from == "campaign.memory_limit_gb"
                                    ? cfg.location("campaign.memory_limit_gb") + ": "
                                    : cfg.source_name() + ": ";
      r.problems.push_back(where + "campaign.memory_limit_gb: the per-rank peak estimate " + fmt(peak / GB) +
                           " GB exceeds the limit of " + fmt(limit_gb) + " GB (" + limit_from +
                           "): raise " + std::string(options.group_size > 0 ? "--group-size" : "campaign.group_size") + " (now " +
                           std::to_string(mem.group_size) +
                           "), shrink cone.n_perp / cone.n_los, or run fewer ranks per node");
    }
  }
  // One check can surface through two modules (a chunk width through slicing and the wedge).
  std::vector<std::string> unique;
  for (auto& p : r.problems)
    if (std::find(unique.begin(), unique.end(), p) == unique.end()) unique.push_back(std::move(p));
  r.problems = std::move(unique);
  return r;
}

}  // namespace spinflip::campaign
