// spinflip status CATALOGUE [--require-complete]: what a catalogue holds, per
// design, with the failures' messages. Exit 0; with --require-complete exit 3
// while entries are still pending (job scripts chain on it).
#include <cstdio>
#include <iostream>
#include <memory>
#include <sstream>

#include "catalogue/catalogue.hpp"
#include "cli/verbs.hpp"
#include "core/errors.hpp"

namespace spinflip::cli {
namespace {

constexpr int incomplete_status = 3;  // jobs/templates/*.sh.in rely on this value

std::string percent(std::size_t part, std::size_t whole) {
  char buf[16];
  std::snprintf(buf, sizeof buf, "%.1f%%", whole ? 100.0 * static_cast<double>(part) / static_cast<double>(whole) : 0.0);
  return buf;
}

std::string report(const std::string& path, const catalogue::Summary& s, std::size_t max_failures) {
  std::ostringstream out;
  out << "catalogue " << path << ": campaign '" << s.campaign_name << "' (sha256 " << s.campaign_sha256.substr(0, 12)
      << "…), created " << s.created_utc << "\n";
  out << "entries: " << s.n_entries << " — done " << s.done << " (" << percent(s.done, s.n_entries) << "), failed "
      << s.failed << ", pending " << s.pending << "\n";
  for (const auto& d : s.designs)
    out << "  design " << d.design_index << (d.name.empty() ? "" : " (" + d.name + ")") << ": done " << d.done
        << ", failed " << d.failed << ", pending " << d.pending << "\n";
  // Every scenario and kernel is written with its entry, so their counts are the entries'.
  for (const auto& k : s.kernels)
    out << "  stats " << k.scenario << "/" << k.kernel << ": " << k.n_units << " " << k.unit_kind
        << (k.n_units == 1 ? "" : "s") << " × " << k.n_coeff << " coefficients, " << s.done << " entries done\n";
  if (!s.failures.empty()) {
    out << "failed entries:\n";
    std::size_t shown = 0;
    for (const auto& f : s.failures) {
      if (shown++ == max_failures) {
        out << "  … and " << s.failures.size() - max_failures << " more (--failures N shows more)\n";
        break;
      }
      out << "  entry " << f.entry << " (point " << f.point << ", realisation " << f.realisation
          << "): " << f.message << "\n";
    }
  }
  out << (s.complete() ? "complete" : "incomplete: " + std::to_string(s.pending) + " entries pending (run again to resume)")
      << (s.failed ? " — " + std::to_string(s.failed) + " failed (spinflip run --retry-failed retries them)" : "")
      << "\n";
  return out.str();
}

RegisterVerb status_verb(
    "status", "entries done, failed and pending in a catalogue, per design, with failure messages", 30,
    [](CLI::App& sub) -> VerbRun {
      auto path = std::make_shared<std::string>();
      auto require = std::make_shared<bool>(false);
      auto max_failures = std::make_shared<std::size_t>(20);
      sub.add_option("catalogue", *path, "catalogue file (catalogue.h5)")->required();
      sub.add_flag("--require-complete", *require,
                   "exit 3 while entries are pending (failed entries count as finished)");
      sub.add_option("--failures", *max_failures, "failure messages to print")->capture_default_str();
      return [=]() {
        // One process reads; the others (under mpirun) only agree on the answer.
        int pending = 0;  // -1: rank 0 could not read the catalogue
        std::string error;
        if (world_rank() == 0) {
          try {
            catalogue::Summary s = catalogue::summarise(*path);
            std::cout << report(*path, s, *max_failures) << std::flush;
            pending = s.complete() ? 0 : 1;
          } catch (const Error& e) {
            pending = -1, error = e.what();
          }
        }
        MPI_Bcast(&pending, 1, MPI_INT, 0, MPI_COMM_WORLD);
        if (pending < 0) throw IoError(world_rank() == 0 ? error : "catalogue unreadable");
        return *require && pending ? incomplete_status : 0;
      };
    });

}  // namespace
}  // namespace spinflip::cli
