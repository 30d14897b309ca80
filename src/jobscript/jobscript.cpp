#include "jobscript/jobscript.hpp"

#include <algorithm>
#include <regex>

#include "core/errors.hpp"

namespace spinflip::jobscript {

std::string shell_quote(std::string_view value) {
  // Inside single quotes a POSIX shell expands nothing; only ' itself needs
  // closing, an escaped quote, and reopening (common practice).
  std::string out = "'";
  for (char c : value) {
    if (c == '\'')
      out += "'\\''";
    else
      out += c;
  }
  out += "'";
  return out;
}

long walltime_seconds(const std::string& walltime) {
  static const std::regex form(R"(^([0-9]{1,4}):([0-5][0-9]):([0-5][0-9])$)");
  std::smatch m;
  if (!std::regex_match(walltime, m, form))
    throw ConfigError("--walltime '" + walltime + "' is not HH:MM:SS (hours 0-9999, minutes and seconds 00-59)");
  const long seconds = std::stol(m[1]) * 3600 + std::stol(m[2]) * 60 + std::stol(m[3]);
  if (seconds < 60)
    throw ConfigError("--walltime '" + walltime + "' is shorter than one minute, the smallest wall time schedulers grant");
  return seconds;
}

namespace {

// Scheduler directive lines (#SBATCH, #PBS) are parsed by the scheduler, not by
// a shell, and have no quoting rule we can rely on: only plain names pass.
void require_plain_name(const std::string& option, const std::string& value) {
  static const std::regex plain(R"(^[A-Za-z0-9][A-Za-z0-9._+-]{0,63}$)");
  if (!std::regex_match(value, plain))
    throw ConfigError(option + " '" + value +
                      "' is not allowed: use 1-64 letters, digits, '.', '_', '+' or '-' (it goes into a scheduler directive)");
}

void require_one_line(const std::string& option, const std::string& value) {
  if (value.find('\0') != std::string::npos)
    throw ConfigError(option + " contains a NUL byte, which no shell can hold");
  (void)option;
}

}  // namespace

void validate(const Request& r) {
  if (r.nodes < 1) throw ConfigError("--nodes " + std::to_string(r.nodes) + " is not allowed: use 1 or more");
  if (r.ranks_per_node < 1)
    throw ConfigError("--ranks-per-node " + std::to_string(r.ranks_per_node) + " is not allowed: use 1 or more");
  if (r.chain < 1) throw ConfigError("--chain " + std::to_string(r.chain) + " is not allowed: use 1 or more jobs");
  const long ranks = long(r.nodes) * r.ranks_per_node;
  if (r.group_size) {
    if (*r.group_size < 1)
      throw ConfigError("--group-size " + std::to_string(*r.group_size) + " is not allowed: use 1 or more");
    if (ranks % *r.group_size != 0)
      throw ConfigError("--group-size " + std::to_string(*r.group_size) + " does not divide the " +
                        std::to_string(ranks) + " ranks (--nodes x --ranks-per-node)");
  }
  const long wall = walltime_seconds(r.walltime);
  if (r.signal_lead_seconds && (*r.signal_lead_seconds < 1 || *r.signal_lead_seconds >= wall))
    throw ConfigError("--signal-lead-seconds " + std::to_string(*r.signal_lead_seconds) +
                      " is not allowed: use 1 to " + std::to_string(wall - 1) + " (less than --walltime " +
                      r.walltime + ")");
  if (r.launcher != "srun" && r.launcher != "mpirun")
    throw ConfigError("--launcher '" + r.launcher + "' is not allowed: use srun or mpirun");
  if (r.launcher == "srun" && r.scheduler == Scheduler::pbs)
    throw ConfigError("--launcher srun needs --scheduler slurm; PBS jobs use mpirun");
  require_plain_name("--name", r.job_name);
  require_plain_name("--srun-mpi", r.srun_mpi);
  if (r.account) require_plain_name("--account", *r.account);
  if (r.partition) require_plain_name(r.scheduler == Scheduler::slurm ? "--partition" : "--partition (queue)", *r.partition);
  require_one_line("--env-setup", r.env_setup);
  require_one_line("--after", r.after);
  for (const auto* p : {&r.campaign, &r.catalogue, &r.spinflip, &r.work_dir, &r.script_path, &r.log_dir})
    if (p->empty() || p->front() != '/') throw InternalError("jobscript request path '" + *p + "' is not absolute");
}

int default_signal_lead(long walltime_seconds) {
  return static_cast<int>(std::clamp(walltime_seconds / 4, 1L, 120L));
}

std::map<std::string, std::string> placeholders(const Request& r) {
  const bool slurm = r.scheduler == Scheduler::slurm;
  std::map<std::string, std::string> v;
  // Directive values: validated plain names and numbers only.
  v["JOB_NAME"] = r.job_name;
  v["NODES"] = std::to_string(r.nodes);
  v["RANKS_PER_NODE"] = std::to_string(r.ranks_per_node);
  v["RANKS"] = std::to_string(long(r.nodes) * r.ranks_per_node);
  v["WALLTIME"] = r.walltime;
  v["WALLTIME_SECONDS"] = std::to_string(walltime_seconds(r.walltime));
  v["SIGNAL_LEAD_SECONDS"] =
      std::to_string(r.signal_lead_seconds.value_or(default_signal_lead(walltime_seconds(r.walltime))));
  v["CHAIN"] = std::to_string(r.chain);
  const std::string prefix = slurm ? "#SBATCH " : "#PBS ";
  v["ACCOUNT_DIRECTIVE"] = r.account ? prefix + (slurm ? "--account=" : "-A ") + *r.account : "# (no account)";
  v["PARTITION_DIRECTIVE"] =
      r.partition ? prefix + (slurm ? "--partition=" : "-q ") + *r.partition : "# (no partition)";
  // Shell values: every one a single quoted word.
  v["CAMPAIGN"] = shell_quote(r.campaign);
  v["CATALOGUE"] = shell_quote(r.catalogue);
  v["SPINFLIP"] = shell_quote(r.spinflip);
  v["WORK_DIR"] = shell_quote(r.work_dir);
  v["SCRIPT"] = shell_quote(r.script_path);
  v["LOG_DIR"] = shell_quote(r.log_dir);
  v["GROUP_SIZE"] = shell_quote(r.group_size ? std::to_string(*r.group_size) : "");
  v["ENV_SETUP"] = shell_quote(r.env_setup);
  v["AFTER"] = shell_quote(r.after);
  v["LAUNCHER"] = shell_quote(r.launcher);
  v["SRUN_MPI"] = shell_quote(r.srun_mpi);
  v["ACCOUNT"] = shell_quote(r.account.value_or(""));
  v["PARTITION"] = shell_quote(r.partition.value_or(""));
  return v;
}

std::string fill(std::string_view text, const std::map<std::string, std::string>& values,
                 const std::string& template_name) {
  std::string out;
  out.reserve(text.size() * 2);
  size_t pos = 0;
  while (true) {
    const size_t open = text.find("{{", pos);
    if (open == std::string_view::npos) break;
    const size_t close = text.find("}}", open + 2);
    if (close == std::string_view::npos)
      throw ConfigError(template_name + ": '{{' at offset " + std::to_string(open) + " is never closed by '}}'");
    const std::string name(text.substr(open + 2, close - open - 2));
    const auto it = values.find(name);
    if (it == values.end()) {
      std::string known;
      for (const auto& [k, _] : values) known += (known.empty() ? "" : ", ") + k;
      throw ConfigError(template_name + ": unknown placeholder {{" + name + "}}; known: " + known);
    }
    out.append(text.substr(pos, open - pos));
    out += it->second;
    pos = close + 2;
  }
  out.append(text.substr(pos));
  return out;
}

std::string render(const Request& request, std::optional<std::string> template_text,
                   const std::string& template_name) {
  validate(request);
  const auto values = placeholders(request);
  if (template_text) return fill(*template_text, values, template_name);
  return fill(builtin_template(request.scheduler), values, template_name);
}

}  // namespace spinflip::jobscript
