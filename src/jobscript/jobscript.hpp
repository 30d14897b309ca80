// Scheduler batch scripts for a campaign (DESIGN.md §8, §9): fill a readable
// template from jobs/templates with safely quoted values. Pure text in, text
// out, so it is testable without a scheduler.
#pragma once
#include <map>
#include <optional>
#include <string>
#include <string_view>

namespace spinflip::jobscript {

enum class Scheduler { slurm, pbs };

/// What the user asked for; validate() refuses anything a scheduler would not take.
struct Request {
  Scheduler scheduler = Scheduler::slurm;
  std::string campaign;                 // absolute path of the campaign file
  std::string catalogue;                // absolute path, passed as `run -o`
  std::string spinflip;                 // absolute path of the spinflip executable
  std::string work_dir;                 // the job changes here first
  std::string script_path;              // where the generated script lives (for resubmission)
  std::string log_dir;                  // scheduler output files
  std::string job_name = "spinflip";
  int nodes = 1;
  int ranks_per_node = 1;
  std::optional<int> group_size;
  std::string walltime = "01:00:00";
  std::optional<std::string> account;
  std::optional<std::string> partition;
  int chain = 10;                       // at most this many jobs in the chain
  std::string env_setup;                // shell code run before the launch
  std::string launcher = "srun";        // srun | mpirun
  std::string srun_mpi = "pmix";
  std::optional<int> signal_lead_seconds;  // unset: default_signal_lead(walltime)
  std::string after;                    // shell code run once the catalogue is complete
};

/// The warning lead when none is given: a quarter of the wall time, at most
/// 120 s (long enough for the entry in progress, short enough for short jobs).
int default_signal_lead(long walltime_seconds);

/// One shell word that a POSIX shell reads back as exactly `value`
/// (single quotes, with ' written as '\''), like bash's printf %q.
std::string shell_quote(std::string_view value);

/// Seconds in an HH:MM:SS wall time; ConfigError for anything else.
long walltime_seconds(const std::string& walltime);

/// Throws ConfigError (one line naming the option and what is allowed).
void validate(const Request& request);

/// The placeholder values for `request`, each already quoted where it is shell.
std::map<std::string, std::string> placeholders(const Request& request);

/// Replaces every {{NAME}} in `template_text`; an unknown name is a ConfigError
/// naming `template_name`, so an edited template cannot fail silently.
std::string fill(std::string_view template_text, const std::map<std::string, std::string>& values,
                 const std::string& template_name);

/// The built-in template text (a copy of jobs/templates/<scheduler>.sh.in).
std::string_view builtin_template(Scheduler scheduler);

/// validate + placeholders + fill with the built-in or the given template text.
std::string render(const Request& request, std::optional<std::string> template_text = std::nullopt,
                   const std::string& template_name = "built-in template");

}  // namespace spinflip::jobscript
