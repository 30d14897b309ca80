// spinflip cone CAMPAIGN --point I --realisation R -o cone.h5: one light cone of
// the campaign exactly as `spinflip run` makes it for that entry (same seeds),
// with its z / frequency / distance axes and global histories, for inspection.
// Under mpirun the world generates it together (FFTW-MPI slabs); rank 0 writes.
#ifdef SPINFLIP_HAVE_DRIVER
#include <algorithm>
#include <cmath>
#include <filesystem>
#include <memory>
#include <sstream>

#include "analysis/internal.hpp"  // run_plot: the python/plots runner the analysis verbs use
#include "campaign/campaign.hpp"
#include "catalogue/hdf5.hpp"
#include "cli/verbs.hpp"
#include "fft/fft.hpp"
#include "fft/planning.hpp"
#include "core/errors.hpp"
#include "core/log.hpp"
#include "core/output_file.hpp"
#include "cosmo/cosmology.hpp"
#include "instrument/instrument.hpp"
#include "sim/lightcone.hpp"

namespace spinflip::cli {
namespace {

namespace h5 = catalogue::h5;

struct ConeArgs {
  std::string campaign_file, output;
  long long point = -1, realisation = 0;
  std::vector<std::string> fields, scenarios;
  std::string preview;
};

void write(hid_t parent, const std::string& name, hid_t type, const std::vector<hsize_t>& dims, const void* data) {
  h5::Handle space = h5::simple_space(dims);
  h5::Handle ds = h5::dataset(
      SPINFLIP_H5_ID(H5Dcreate2(parent, name.c_str(), type, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT)));
  SPINFLIP_H5(H5Dwrite(ds, type, H5S_ALL, H5S_ALL, H5P_DEFAULT, data));
}
void write_cube(hid_t parent, const std::string& name, const core::Array3<float>& a) {
  write(parent, name, H5T_NATIVE_FLOAT, {a.shape[0], a.shape[1], a.shape[2]}, a.data.data());
}
void write_axis(hid_t parent, const std::string& name, const std::vector<double>& v) {
  write(parent, name, H5T_NATIVE_DOUBLE, {v.size()}, v.data());
}

int run_cone(const ConeArgs& a) {
  h5::silence_errors();
  const auto c = campaign::Campaign::load(a.campaign_file);
  const std::size_t n_points = c.points().size();
  if (a.point < 0 || static_cast<std::size_t>(a.point) >= n_points)
    throw InputError("--point " + std::to_string(a.point) + ": the campaign " + a.campaign_file + " has " +
                     std::to_string(n_points) + " design points (allowed 0–" + std::to_string(n_points - 1) + ")");
  if (a.realisation < 0)
    throw InputError("--realisation " + std::to_string(a.realisation) + ": allowed 0 or more");
  for (const auto& f : a.fields)
    if (f != "density" && f != "x_hi" && f != "z_ion" && f != "spin")
      throw InputError("--fields " + f + ": allowed density, x_hi, z_ion, spin");
  const core::Config cfg = c.config_for_point(static_cast<std::size_t>(a.point));
  for (const auto& s : a.scenarios) {
    const auto names = cfg.table_names("scenarios");
    if (std::find(names.begin(), names.end(), s) == names.end())
      throw InputError("--scenario " + s + ": the campaign has no [scenarios." + s + "] table");
  }
  // Refuse unwritable destinations before the cone is generated (every rank checks alike).
  core::check_output_folder(a.output, "-o");
  if (!a.preview.empty()) core::check_output_folder(a.preview, "--preview");

  campaign::Entry entry{static_cast<std::size_t>(a.point), static_cast<std::size_t>(a.realisation)};
  const rng::EntryKey key = c.entry_key(entry);
  sim::ConeSettings settings = sim::settings_from(cfg);
  auto wants = [&](const char* f) { return std::find(a.fields.begin(), a.fields.end(), f) != a.fields.end(); };
  settings.keep_density = wants("density");
  settings.keep_x_hi = wants("x_hi");
  settings.keep_z_ion = wants("z_ion");
  settings.keep_spin = wants("spin");
  const cosmo::Cosmology cosmology(cosmo::parameters_from(cfg));
  // The generator's plans from one wisdom on every rank, as `spinflip run` makes them
  // (seeded from the user's wisdom cache, so a cone matches its catalogue entry).
  fft::set_planning(fft::planning_from(cfg));
  fft::set_wisdom_only(true);
  const fft::SharedWisdom wisdom = fft::share_wisdom(MPI_COMM_WORLD, std::nullopt, fft::wisdom_cache_from(cfg), [&] {
    { const fft::SlabField field({settings.n_perp, settings.n_perp, settings.n_los}, MPI_COMM_WORLD); }
    if (world_size() > 1) fft::gather_wisdom(MPI_COMM_WORLD);
  });
  sim::LightCone cone = sim::generate_cone(settings, cosmology, key, MPI_COMM_WORLD);
  core::Array3<float> tb = sim::allgather_cone(cone, MPI_COMM_WORLD);
  std::vector<std::pair<std::string, core::Array3<float>>> extra;
  if (cone.density) extra.emplace_back("density", sim::allgather_field(cone, *cone.density, MPI_COMM_WORLD));
  if (cone.x_hi) extra.emplace_back("x_hi", sim::allgather_field(cone, *cone.x_hi, MPI_COMM_WORLD));
  if (cone.z_ion) extra.emplace_back("z_ion", sim::allgather_field(cone, *cone.z_ion, MPI_COMM_WORLD));
  if (cone.spin_K) extra.emplace_back("spin_temperature_K", sim::allgather_field(cone, *cone.spin_K, MPI_COMM_WORLD));
  if (cone.gas_K) extra.emplace_back("gas_temperature_K", sim::allgather_field(cone, *cone.gas_K, MPI_COMM_WORLD));
  if (world_rank() != 0) return 0;
  fft::set_wisdom_only(false);  // rank 0 alone applies the scenarios: it may measure their plans

  instrument::ConeGeometry geo;
  geo.shape = tb.shape;
  geo.cell_mpc = cone.cell_mpc;
  geo.z = cone.z, geo.freq_MHz = cone.freq_MHz, geo.distance_mpc = cone.distance_mpc;

  h5::Handle fapl = h5::plist(SPINFLIP_H5_ID(H5Pcreate(H5P_FILE_ACCESS)));
  // Written whole or not at all: built in memory (HDF5's core driver) and
  // written out at the end, so a failure or a full disk leaves no partial file.
  SPINFLIP_H5(H5Pset_fapl_core(fapl, 1 << 24, false));
  core::OutputFile target(a.output);
  hid_t fid = H5Fcreate("spinflip-cone-output", H5F_ACC_TRUNC, H5P_DEFAULT, fapl);
  if (fid < 0) throw IoError("-o " + a.output + ": cannot create the file (" + h5::error_stack_text() + ")");
  h5::Handle file = h5::file(fid);
  write_cube(file, "delta_tb_mK", tb);
  write_axis(file, "z", cone.z);
  write_axis(file, "freq_MHz", cone.freq_MHz);
  write_axis(file, "distance_mpc", cone.distance_mpc);
  {
    h5::Handle hist = h5::group(SPINFLIP_H5_ID(H5Gcreate2(file, "history", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT)));
    write_axis(hist, "x_hi", cone.x_hi_mean);
    write_axis(hist, "mean_tb_mK", cone.tb_mean_mK);
    if (!cone.ts_mean_K.empty()) {  // the spin-temperature model's plane means
      write_axis(hist, "mean_tk_K", cone.tk_mean_K);
      write_axis(hist, "mean_ts_K", cone.ts_mean_K);
      write_axis(hist, "mean_x_alpha", cone.x_alpha_mean);
      write_axis(hist, "mean_x_e", cone.x_e_mean);
    }
  }
  for (const auto& [name, field] : extra) write_cube(file, name, field);
  if (!a.scenarios.empty()) {
    h5::Handle obs = h5::group(SPINFLIP_H5_ID(H5Gcreate2(file, "observed", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT)));
    h5::Handle uv_group;
    for (auto& s : instrument::scenarios_from(cfg, cosmology, geo)) {
      if (std::find(a.scenarios.begin(), a.scenarios.end(), s.name()) == a.scenarios.end()) continue;
      core::Array3<float> observed = tb;
      s.apply(observed, geo, key);
      write_cube(obs, s.name(), observed);
      // Observing time per uv cell at the middle of the band (what sets the resolution).
      const std::size_t mid = geo.shape[2] / 2;
      const core::Array2<float> t = s.uv_time_s(mid);
      if (std::all_of(t.data.begin(), t.data.end(), [](float v) { return std::isfinite(v); })) {
        if (!uv_group) {
          uv_group = h5::group(SPINFLIP_H5_ID(H5Gcreate2(file, "uv", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT)));
          h5::write_attribute(uv_group, "freq_MHz", geo.freq_MHz[mid]);
        }
        write(uv_group, s.name(), H5T_NATIVE_FLOAT, {t.shape[0], t.shape[1]}, t.data.data());
      }
    }
  }
  h5::write_attribute(file, "campaign_sha256", c.sha256());
  h5::write_attribute(file, "campaign_text", c.config().text());
  h5::write_attribute(file, "fft_wisdom_sha256", wisdom.sha256);
  h5::write_attribute(file, "point", static_cast<std::int64_t>(a.point));
  h5::write_attribute(file, "realisation", static_cast<std::int64_t>(a.realisation));
  h5::write_attribute(file, "seed", std::vector<std::int64_t>{static_cast<std::int64_t>(key.campaign_seed),
                                                             static_cast<std::int64_t>(key.point),
                                                             static_cast<std::int64_t>(key.realisation)});
  std::vector<std::string> names, labels, units;
  for (const auto& p : c.parameters()) {
    names.push_back(p.name);
    labels.push_back(p.label.empty() ? p.name : p.label);
    units.push_back(p.unit);
  }
  h5::write_attribute(file, "param_names", names);
  h5::write_attribute(file, "param_labels", labels);  // for the preview's title
  h5::write_attribute(file, "param_units", units);
  h5::write_attribute(file, "role", campaign::role_name(c.points()[static_cast<std::size_t>(a.point)].role));
  h5::write_attribute(file, "params", c.points()[static_cast<std::size_t>(a.point)].values);
  h5::write_attribute(file, "cell_mpc", cone.cell_mpc);
  SPINFLIP_H5(H5Fflush(file, H5F_SCOPE_GLOBAL));
  const ssize_t n_bytes = H5Fget_file_image(file, nullptr, 0);
  std::string bytes(static_cast<std::size_t>(std::max<ssize_t>(n_bytes, 0)), '\0');
  if (n_bytes <= 0 || H5Fget_file_image(file, bytes.data(), bytes.size()) != n_bytes)
    throw InternalError("-o " + a.output + ": cannot copy the in-memory HDF5 file");
  file.close();
  target.write_and_commit(bytes);
  log::info("cone: point {} realisation {} ({}×{}×{} cells, z {:.3f}–{:.3f}) written to {}", a.point, a.realisation,
            tb.shape[0], tb.shape[1], tb.shape[2], cone.z.front(), cone.z.back(), a.output);
  if (!a.preview.empty() && analysis::detail::run_plot("plot_cone.py", {a.output, a.preview}))
    log::info("cone: preview written to {}", a.preview);
  return 0;
}

RegisterVerb cone_verb("cone", "one light cone of a campaign (point, realisation) with its axes, for inspection", 25,
                       [](CLI::App& sub) -> VerbRun {
                         auto a = std::make_shared<ConeArgs>();
                         sub.add_option("campaign", a->campaign_file, "campaign file (TOML)")->required();
                         sub.add_option("--point", a->point, "design point index")->required();
                         sub.add_option("--realisation", a->realisation, "realisation index (seed)")
                             ->capture_default_str();
                         sub.add_option("-o,--output", a->output, "the HDF5 file written (required)")->required();
                         sub.add_option("--fields", a->fields, "also write: density, x_hi, z_ion, spin (T_S and T_K)")->delimiter(',');
                         sub.add_option("--scenario", a->scenarios,
                                        "also write the cone as this scenario observes it (repeatable)");
                         sub.add_option("--preview", a->preview,
                                        "also write this PNG picture: transverse slice, line-of-sight cut, histories, uv coverage "
                                        "(default: none)");
                         return [a]() { return run_cone(*a); };
                       });

}  // namespace
}  // namespace spinflip::cli
#endif
