// spinflip jobscript CAMPAIGN --scheduler slurm|pbs ...: writes a batch script
// that runs the campaign in a chain of wall-time-limited jobs (DESIGN.md §8, §9).
#include <unistd.h>

#include <filesystem>
#include <fstream>
#include <iostream>
#include <optional>
#include <sstream>

#include "cli/verbs.hpp"
#include "core/errors.hpp"
#include "core/output_file.hpp"
#include "jobscript/jobscript.hpp"

namespace spinflip::cli {
namespace {

namespace fs = std::filesystem;

struct Options {
  std::string campaign, scheduler = "slurm", walltime = "01:00:00", output, catalogue;
  std::string account, partition, env_setup, spack_env, launcher, after, name, spinflip, template_file;
  std::string srun_mpi = "pmix";
  int nodes = 1, ranks_per_node = 1, group_size = 0, chain = 10;
  std::optional<int> signal_lead;
};

std::string read_text(const fs::path& path, const std::string& what) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw IoError(what + " '" + path.string() + "' cannot be read");
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

std::string this_executable() {
  std::error_code ec;
  const auto p = fs::read_symlink("/proc/self/exe", ec);
  if (ec) throw IoError("cannot find the spinflip executable (/proc/self/exe); give --spinflip PATH");
  return p.string();
}

int run_jobscript(const Options& o) {
  jobscript::Request r;
  if (o.scheduler == "slurm")
    r.scheduler = jobscript::Scheduler::slurm;
  else if (o.scheduler == "pbs")
    r.scheduler = jobscript::Scheduler::pbs;
  else
    throw ConfigError("--scheduler '" + o.scheduler + "' is not allowed: use slurm or pbs");
  const fs::path campaign = fs::absolute(o.campaign).lexically_normal();
  if (!fs::is_regular_file(campaign)) throw IoError("campaign file '" + campaign.string() + "' does not exist");
  if (!o.env_setup.empty() && !o.spack_env.empty())
    throw ConfigError("--env-setup and --spack-env are alternatives: give one of them");
  r.campaign = campaign.string();
  r.work_dir = fs::current_path().string();
  // -o is the file written, as in every verb; an existing folder, or a path
  // ending in / (created), takes the script under its default name.
  r.job_name = o.name.empty() ? campaign.stem().string() : o.name;
  const std::string ext = r.scheduler == jobscript::Scheduler::slurm ? ".slurm" : ".pbs";
  fs::path script = fs::absolute(o.output.empty() ? fs::path(".") : fs::path(o.output)).lexically_normal();
  if (o.output.empty() || o.output.back() == '/' || fs::is_directory(script)) script /= r.job_name + ext;
  const fs::path out_dir = script.parent_path();
  r.script_path = script.string();
  r.log_dir = (out_dir / "logs").string();
  r.catalogue = o.catalogue.empty() ? (fs::path(r.work_dir) / (campaign.stem().string() + ".h5")).string()
                                    : fs::absolute(o.catalogue).lexically_normal().string();
  r.spinflip = o.spinflip.empty() ? this_executable() : fs::absolute(o.spinflip).string();
  r.nodes = o.nodes;
  r.ranks_per_node = o.ranks_per_node;
  if (o.group_size != 0) r.group_size = o.group_size;
  r.walltime = o.walltime;
  if (!o.account.empty()) r.account = o.account;
  if (!o.partition.empty()) r.partition = o.partition;
  r.chain = o.chain;
  r.env_setup = o.spack_env.empty() ? o.env_setup
                                    : "spack env activate " + jobscript::shell_quote(fs::absolute(o.spack_env).string());
  r.launcher = o.launcher.empty() ? (r.scheduler == jobscript::Scheduler::slurm ? "srun" : "mpirun") : o.launcher;
  r.srun_mpi = o.srun_mpi;
  r.signal_lead_seconds = o.signal_lead;
  r.after = o.after;

  std::string text;
  if (o.template_file.empty())
    text = jobscript::render(r);
  else
    text = jobscript::render(r, read_text(o.template_file, "--template"), o.template_file);

  if (world_rank() != 0) return 0;
  std::error_code ec;
  if (!o.output.empty() && o.output.back() == '/') fs::create_directories(out_dir, ec);
  core::check_output_folder(r.script_path, "-o");
  fs::create_directories(r.log_dir, ec);
  if (ec) throw IoError("-o '" + r.script_path + "': cannot create the log folder " + r.log_dir + ": " + ec.message());
  {
    core::OutputFile target(r.script_path);  // a previous script stays whole until this one is
    std::ofstream f(target.path(), std::ios::binary | std::ios::trunc);
    if (!(f << text) || !f.flush()) throw IoError("-o: cannot write the job script '" + r.script_path + "'");
    f.close();
    fs::permissions(target.path(), fs::perms::owner_exec | fs::perms::group_exec, fs::perm_options::add, ec);
    target.commit();
  }
  const auto q = [](const std::string& s) { return jobscript::shell_quote(s); };
  std::cout << "wrote " << r.script_path << "\n";
  if (r.scheduler == jobscript::Scheduler::slurm)
    std::cout << "submit with:\n  sbatch --output=" << q(r.log_dir + "/%x-%j.out") << " " << q(r.script_path) << "\n";
  else
    std::cout << "submit with:\n  qsub -o " << q(r.log_dir) << " " << q(r.script_path) << "\n";
  std::cout << "it resubmits itself (at most " << r.chain << " jobs) until " << r.catalogue << " is complete\n";
  return 0;
}

RegisterVerb jobscript_verb(
    "jobscript", "write a Slurm or PBS batch script that runs a campaign in a chain of jobs", 80,
    [](CLI::App& sub) -> VerbRun {
      auto o = std::make_shared<Options>();
      sub.add_option("campaign", o->campaign, "campaign file")->required();
      sub.add_option("--scheduler", o->scheduler, "slurm or pbs")->capture_default_str();
      sub.add_option("--nodes", o->nodes, "nodes per job")->capture_default_str();
      sub.add_option("--ranks-per-node", o->ranks_per_node, "MPI ranks per node")->capture_default_str();
      sub.add_option("--group-size", o->group_size, "ranks sharing one light cone (passed to run)");
      sub.add_option("--walltime", o->walltime, "wall time per job, HH:MM:SS")->capture_default_str();
      sub.add_option("--account", o->account, "account to charge");
      sub.add_option("--partition", o->partition, "partition (Slurm) or queue (PBS)");
      sub.add_option("--chain", o->chain, "at most this many jobs in the chain")->capture_default_str();
      sub.add_option("-o,--output", o->output,
                     "the script file written (default: ./<name>.slurm or .pbs; a folder takes that name); "
                     "the scheduler's logs go to logs/ beside it");
      sub.add_option("--catalogue", o->catalogue, "catalogue path (default: ./<campaign>.h5)");
      sub.add_option("--env-setup", o->env_setup, "shell code run first, e.g. 'module load openmpi hdf5'");
      sub.add_option("--spack-env", o->spack_env, "Spack environment folder to activate");
      sub.add_option("--launcher", o->launcher, "srun or mpirun (default: srun on Slurm, mpirun on PBS)");
      sub.add_option("--srun-mpi", o->srun_mpi, "srun --mpi plugin")->capture_default_str();
      sub.add_option("--signal-lead-seconds", o->signal_lead,
                     "warn the run this long before the wall time (default: a quarter of --walltime, at most 120)");
      sub.add_option("--after", o->after, "shell code run once the catalogue is complete (analysis verbs)");
      sub.add_option("--name", o->name, "job name (default: the campaign file's stem)");
      sub.add_option("--spinflip", o->spinflip, "spinflip executable the job runs (default: this one)");
      sub.add_option("--template", o->template_file, "your own template (default: jobs/templates/<scheduler>.sh.in)");
      return [o]() { return run_jobscript(*o); };
    });

}  // namespace
}  // namespace spinflip::cli
