// spinflip ingest CAMPAIGN [--scan] [--cone I -o OUT.npy]: check every cone file
// of a campaign's [ingest] manifest (headers only unless --scan) and list every
// problem, one line each, exit 2; with --cone, read that manifest cone onto the
// campaign grid (as `run` would) and write it as .npy (x, y, los; mK).
#ifdef SPINFLIP_HAVE_INGEST
#include <bit>
#include <cstdint>
#include <fstream>
#include <iostream>

#include "campaign/schema.hpp"
#include "cli/verbs.hpp"
#include "core/errors.hpp"
#include "core/output_file.hpp"
#include "cosmo/cosmology.hpp"
#include "ingest/ingest.hpp"
#include "sim/lightcone.hpp"

namespace spinflip::cli {
namespace {

struct IngestArgs {
  std::string campaign_file, output;
  bool scan = false;
  long cone = -1;
};

/// .npy version 1.0, little-endian float32, C order (numpy's format.py layout).
void write_npy(const std::string& path, const core::Array3<float>& a) {
  std::string header = "{'descr': '<f4', 'fortran_order': False, 'shape': (" + std::to_string(a.shape[0]) + ", " +
                       std::to_string(a.shape[1]) + ", " + std::to_string(a.shape[2]) + "), }";
  while ((10 + header.size() + 1) % 64 != 0) header += ' ';
  header += '\n';
  core::OutputFile target(path);  // written whole or not at all
  std::ofstream out(target.path(), std::ios::binary);
  if (!out) throw IoError("-o " + path + ": cannot be written");
  out.write("\x93NUMPY\x01\x00", 8);
  const auto n = static_cast<std::uint16_t>(header.size());
  const char len[2] = {static_cast<char>(n & 0xff), static_cast<char>(n >> 8)};
  out.write(len, 2);
  out.write(header.data(), static_cast<std::streamsize>(header.size()));
  static_assert(std::endian::native == std::endian::little, "writer assumes a little-endian machine");
  out.write(reinterpret_cast<const char*>(a.data.data()), static_cast<std::streamsize>(a.data.size() * 4));
  if (!out.flush()) throw IoError("-o " + path + ": write failed (a full disk?); the previous file, if any, is kept");
  out.close();
  target.commit();
}

RegisterVerb ingest_verb(
    "ingest", "check the cone files of a campaign's [ingest] manifest; --cone I -o F.npy reads one cone", 15,
    [](CLI::App& sub) -> VerbRun {
      auto a = std::make_shared<IngestArgs>();
      sub.add_option("campaign", a->campaign_file, "campaign file (TOML) with an [ingest] table")->required();
      sub.add_flag("--scan", a->scan, "also read every file's data looking for NaN or Inf");
      sub.add_option("--cone", a->cone, "manifest cone (0-based, in manifest order) to read onto the campaign grid")
          ->check(CLI::NonNegativeNumber);
      sub.add_option("-o,--output", a->output, "with --cone: write the cone here (.npy, x × y × los, mK)");
      return [a]() {
        if ((a->cone >= 0) != !a->output.empty()) throw ConfigError("ingest: --cone and -o go together");
        core::Schema schema = campaign::campaign_schema();
        if (!schema.find("ingest.manifest")) ingest::declare_keys(schema);
        const auto cfg = core::Config::from_file(a->campaign_file, schema);
        if (!cfg.has_table("ingest"))
          throw ConfigError(a->campaign_file + ": no [ingest] table (the campaign generates its cones)");
        const auto problems = ingest::check_campaign(cfg, a->scan);  // what plan lists
        const auto manifest = ingest::manifest_from(cfg);
        if (!problems.empty()) {
          if (world_rank() == 0) {
            for (const auto& p : problems) std::cerr << "spinflip: error: " << p << "\n";
            std::cerr << "spinflip: ingest: " << problems.size() << " problem" << (problems.size() == 1 ? "" : "s")
                      << " in " << manifest.source.string() << "\n";
          }
          return 2;
        }
        if (a->cone < 0) {
          if (world_rank() == 0)
            std::cout << "ingest: OK, " << manifest.rows.size() << " cones in " << manifest.source.string()
                      << " cover the campaign grid\n";
          return 0;
        }
        if (static_cast<std::size_t>(a->cone) >= manifest.rows.size())
          throw ConfigError("ingest: --cone " + std::to_string(a->cone) + ": the manifest has " +
                            std::to_string(manifest.rows.size()) + " cones (0.." +
                            std::to_string(manifest.rows.size() - 1) + ")");
        const cosmo::Cosmology cosmology(cosmo::parameters_from(cfg));
        const auto target = ingest::target_from(sim::settings_from(cfg), cosmology);
        const auto got = ingest::read_cone(manifest, static_cast<std::size_t>(a->cone), target, cosmology,
                                           MPI_COMM_WORLD);
        const auto whole = sim::allgather_cone(got.cone, MPI_COMM_WORLD);
        if (world_rank() == 0) {
          write_npy(a->output, whole);
          std::cout << "ingest: cone " << a->cone << " from " << got.file.string() << " sha256 " << got.sha256
                    << " -> " << a->output << "\n";
        }
        return 0;
      };
    });

}  // namespace
}  // namespace spinflip::cli
#endif  // SPINFLIP_HAVE_INGEST
