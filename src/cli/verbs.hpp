// Command verbs register themselves here; main() builds the CLI11 app from
// the list. A verb file is src/cli/verb_<name>.cpp and touches nothing else.
#pragma once
#include <CLI/CLI.hpp>

#include <functional>
#include <string>
#include <vector>

namespace spinflip::cli {

/// What a verb returns to main: its exit status.
using VerbRun = std::function<int()>;
/// Adds the verb's options to its subcommand and returns the action to run.
using VerbSetup = std::function<VerbRun(CLI::App& subcommand)>;

struct VerbInfo {
  std::string name;
  std::string help;
  VerbSetup setup;
  int order;  // position in --help
};

std::vector<VerbInfo>& verb_registry();

struct RegisterVerb {
  RegisterVerb(std::string name, std::string help, int order, VerbSetup setup) {
    verb_registry().push_back({std::move(name), std::move(help), std::move(setup), order});
  }
};

/// MPI rank and size of the world, for verbs that care.
int world_rank();
int world_size();

}  // namespace spinflip::cli
