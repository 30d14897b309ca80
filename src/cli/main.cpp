// spinflip: entry point. Every error is caught here once: user errors exit 2
// with one line, internal errors exit 1; nothing else prints a stack trace.
#include <mpi.h>

#include <algorithm>
#include <cstdio>
#include <iostream>

#include "cli/verbs.hpp"
#include "core/config.hpp"
#include "core/errors.hpp"
#include "core/log.hpp"
#include "core/version.hpp"

namespace spinflip::cli {
std::vector<VerbInfo>& verb_registry() {
  static std::vector<VerbInfo> verbs;
  return verbs;
}
int world_rank() {
  int r = 0;
  MPI_Comm_rank(MPI_COMM_WORLD, &r);
  return r;
}
int world_size() {
  int s = 1;
  MPI_Comm_size(MPI_COMM_WORLD, &s);
  return s;
}
}  // namespace spinflip::cli

namespace {

/// The verb a mistyped first word was probably meant to be ("" if none is close).
std::string closest_verb(const std::string& word) {
  std::string best;
  std::size_t best_d = 3;  // at most two edits away, else no suggestion
  for (const auto& v : spinflip::cli::verb_registry()) {
    const std::size_t d = spinflip::core::edit_distance(word, v.name);
    if (d < best_d) best_d = d, best = v.name;
  }
  return best;
}

/// The first argument that is not an option (the verb, if any).
const char* first_word(int argc, char** argv) {
  for (int i = 1; i < argc; ++i)
    if (argv[i][0] != '-') return argv[i];
  return nullptr;
}

int run_cli(int argc, char** argv) {
  using namespace spinflip;
  CLI::App app{"spinflip: summary-statistic campaigns on 21-cm light cones"};
  app.require_subcommand(0, 1);
  bool show_version = false, verbose = false, quiet = false;
  app.add_flag("--version", show_version, "print the version and exit");
  app.add_flag("-v,--verbose", verbose, "debug logging, on every rank (accepted before or after the verb)");
  app.add_flag("-q,--quiet", quiet, "warnings and errors only (accepted before or after the verb)");
  // Subcommands made from here on hand options they do not know (-q, -v) to the app.
  app.fallthrough();

  auto& verbs = cli::verb_registry();
  std::sort(verbs.begin(), verbs.end(), [](auto& a, auto& b) { return a.order < b.order; });
  std::vector<std::pair<CLI::App*, cli::VerbRun>> actions;
  for (auto& verb : verbs) {
    CLI::App* sub = app.add_subcommand(verb.name, verb.help);
    actions.emplace_back(sub, verb.setup(*sub));
  }
  try {
    app.parse(argc, argv);
  } catch (const CLI::CallForHelp& e) {
    if (cli::world_rank() == 0) app.exit(e);
    return 0;
  } catch (const CLI::CallForAllHelp& e) {
    if (cli::world_rank() == 0) app.exit(e);
    return 0;
  } catch (const CLI::ParseError& e) {
    if (cli::world_rank() == 0) {
      const char* word = first_word(argc, argv);
      const bool verb_known = word && std::any_of(verbs.begin(), verbs.end(), [&](auto& v) { return v.name == word; });
      if (word && !verb_known) {
        const std::string near = closest_verb(word);
        std::cerr << "spinflip: error: unknown verb '" << word << "'"
                  << (near.empty() ? std::string() : " (did you mean '" + near + "'?)")
                  << "; spinflip --help lists the verbs\n";
      } else {
        std::cerr << "spinflip: error: " << e.what() << " (see spinflip " << (word ? std::string(word) + " " : "")
                  << "--help)\n";
      }
    }
    return 2;
  }
  log::init(cli::world_rank(), cli::world_size(),
            verbose ? log::Verbosity::verbose : quiet ? log::Verbosity::quiet : log::Verbosity::normal);
  if (show_version) {
    if (cli::world_rank() == 0)
      std::cout << "spinflip " << tool_version << " (" << git_revision << ", " << compiler_id << ")\n";
    return 0;
  }
  for (auto& [sub, run] : actions)
    if (sub->parsed()) return run();
  // No verb: the usage goes to stderr and the status says nothing was done.
  if (cli::world_rank() == 0) std::cerr << app.help() << "spinflip: error: no verb given\n";
  return 2;
}

}  // namespace

int main(int argc, char** argv) {
  int provided = 0;
  MPI_Init_thread(&argc, &argv, MPI_THREAD_FUNNELED, &provided);
  int status = 0;
  bool abort_all = false;
  try {
    status = run_cli(argc, argv);
  } catch (const spinflip::Error& e) {
    status = e.exit_status();
    // User errors are raised identically on every rank (validation is
    // collective), so rank 0 speaks for all; internal errors may be local.
    std::string message = e.what();  // one line, whatever a message quotes
    std::replace(message.begin(), message.end(), '\n', ' ');
    if (spinflip::cli::world_rank() == 0 || status != 2) std::cerr << "spinflip: error: " << message << "\n";
    abort_all = status != 2 && spinflip::cli::world_size() > 1;
  } catch (const std::exception& e) {
    std::cerr << "spinflip: internal error: " << e.what() << "\n";
    status = 1;
    abort_all = spinflip::cli::world_size() > 1;
  }
  std::fflush(stdout);
  std::fflush(stderr);
  if (abort_all) MPI_Abort(MPI_COMM_WORLD, status);
  MPI_Finalize();
  return status;
}
