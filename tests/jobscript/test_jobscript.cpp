// Generator checks against bash itself (the shell that will read the script).
#include <gtest/gtest.h>

#include <array>
#include <cstdio>
#include <fstream>
#include <sstream>

#include "core/errors.hpp"
#include "jobscript/jobscript.hpp"

namespace sj = spinflip::jobscript;

namespace {

// Runs a bash snippet and returns its stdout (and exit status through `status`).
std::string bash_output(const std::string& code, int* status = nullptr) {
  char path[] = "/tmp/spinflip_jobscript_XXXXXX";
  const int fd = mkstemp(path);
  EXPECT_GE(fd, 0);
  {
    std::ofstream f(path);
    f << code;
  }
  close(fd);
  std::string out;
  FILE* p = popen((std::string("/bin/bash ") + path + " 2>&1").c_str(), "r");
  std::array<char, 4096> buf{};
  size_t n = 0;
  while ((n = fread(buf.data(), 1, buf.size(), p)) > 0) out.append(buf.data(), n);
  const int rc = pclose(p);
  if (status) *status = WEXITSTATUS(rc);
  std::remove(path);
  return out;
}

sj::Request tricky_request() {
  sj::Request r;
  r.campaign = "/tmp/my campaigns/it's \"tiny\" $(touch /tmp/pwned)/campaign.toml";
  r.catalogue = "/tmp/out dir/`id`;$HOME.h5";
  r.spinflip = "/opt/spin flip/bin/spinflip";
  r.work_dir = "/tmp/my campaigns";
  r.script_path = "/tmp/my campaigns/jobs/tiny.slurm";
  r.log_dir = "/tmp/my campaigns/jobs/logs";
  r.account = "astro-21cm";
  r.env_setup = "echo \"setup $((1+1))\"";
  r.after = "echo done > '/tmp/x y'";
  r.walltime = "00:05:00";
  r.signal_lead_seconds = 60;
  r.chain = 3;
  return r;
}

}  // namespace

TEST(ShellQuote, RoundTripsThroughBash) {
  // bash must read each quoted word back byte for byte (POSIX single-quote rule, common practice).
  const std::vector<std::string> values = {"plain", "with space", "it's", "'", "''", "a\"b", "$(touch /tmp/pwned)",
                                           "`id`", "$HOME", "back\\slash", "new\nline", "*?[a]", "", "-n", "tab\there",
                                           "semi;colon&amp|pipe"};
  for (const auto& v : values) {
    const std::string out = bash_output("printf '%s' " + sj::shell_quote(v));
    EXPECT_EQ(out, v) << "quoted as " << sj::shell_quote(v);
  }
}

TEST(Walltime, ParsesAndRefuses) {
  EXPECT_EQ(sj::walltime_seconds("01:02:03"), 3723);
  EXPECT_EQ(sj::walltime_seconds("48:00:00"), 172800);
  for (const char* bad : {"1:00", "00:60:00", "00:00:61", "aa:bb:cc", "00:00:30", "", "01:00:00 ", "-1:00:00"})
    EXPECT_THROW(sj::walltime_seconds(bad), spinflip::ConfigError) << bad;
}

TEST(Validate, RefusesBadRequests) {
  auto expect_refused = [](auto change, const char* what) {
    auto r = tricky_request();
    change(r);
    EXPECT_THROW(sj::validate(r), spinflip::ConfigError) << what;
  };
  expect_refused([](sj::Request& r) { r.chain = 0; }, "chain 0");
  expect_refused([](sj::Request& r) { r.nodes = 0; }, "nodes 0");
  expect_refused([](sj::Request& r) { r.ranks_per_node = -1; }, "ranks -1");
  expect_refused([](sj::Request& r) { r.ranks_per_node = 3; r.group_size = 2; }, "group does not divide");
  expect_refused([](sj::Request& r) { r.signal_lead_seconds = 300; }, "lead == walltime");
  expect_refused([](sj::Request& r) { r.account = "$(touch /tmp/pwned)"; }, "account with $(...)");
  expect_refused([](sj::Request& r) { r.partition = "a b"; }, "partition with space");
  expect_refused([](sj::Request& r) { r.launcher = "aprun"; }, "launcher");
  expect_refused([](sj::Request& r) { r.scheduler = sj::Scheduler::pbs; }, "srun under pbs");
  EXPECT_NO_THROW(sj::validate(tricky_request()));
}

TEST(Fill, UnknownPlaceholderIsAConfigError) {
  EXPECT_EQ(sj::fill("a={{X}};b={{X}}", {{"X", "1"}}, "t"), "a=1;b=1");
  EXPECT_THROW(sj::fill("{{NOPE}}", {{"X", "1"}}, "t"), spinflip::ConfigError);
  EXPECT_THROW(sj::fill("{{X", {{"X", "1"}}, "t"), spinflip::ConfigError);
}

TEST(Render, BuiltInTemplatesMatchTheFilesAndPassBashSyntaxCheck) {
  for (auto [scheduler, file] : {std::pair{sj::Scheduler::slurm, "slurm.sh.in"}, std::pair{sj::Scheduler::pbs, "pbs.sh.in"}}) {
    std::ifstream f(std::string(SPINFLIP_TEMPLATE_DIR) + "/" + file);
    std::stringstream s;
    s << f.rdbuf();
    EXPECT_EQ(s.str(), std::string(sj::builtin_template(scheduler))) << file << " (re-run cmake)";
    auto r = tricky_request();
    r.scheduler = scheduler;
    if (scheduler == sj::Scheduler::pbs) r.launcher = "mpirun";
    const std::string script = sj::render(r);
    EXPECT_EQ(script.find("{{"), std::string::npos);
    int status = -1;
    const std::string out = bash_output("bash -n <<'SPINFLIP_EOF'\n" + script + "\nSPINFLIP_EOF\n", &status);
    EXPECT_EQ(status, 0) << file << ": " << out;
  }
}

TEST(Render, ValuesReachTheShellUnchanged) {
  // Evaluate only the assignment block of the generated script and print each variable.
  const auto r = tricky_request();
  const std::string script = sj::render(r);
  std::string assignments;
  std::istringstream lines(script);
  for (std::string line; std::getline(lines, line);)
    for (const char* var : {"campaign=", "catalogue=", "spinflip=", "work_dir=", "env_setup=", "after=", "account="})
      if (line.rfind(var, 0) == 0) assignments += line + "\n";
  const std::string out = bash_output(assignments +
                                      "printf '%s\\n' \"$campaign\" \"$catalogue\" \"$spinflip\" \"$work_dir\" "
                                      "\"$env_setup\" \"$after\" \"$account\"\n");
  EXPECT_EQ(out, r.campaign + "\n" + r.catalogue + "\n" + r.spinflip + "\n" + r.work_dir + "\n" + r.env_setup +
                     "\n" + r.after + "\n" + *r.account + "\n");
  EXPECT_NE(script.find("#SBATCH --signal=B:USR1@60"), std::string::npos);
  EXPECT_NE(script.find("#SBATCH --time=00:05:00"), std::string::npos);
  EXPECT_NE(script.find("#SBATCH --account=astro-21cm"), std::string::npos);
}

TEST(SignalLead, DefaultFollowsTheWallTime) {
  // Issue 19: a one-minute job must not be refused for a lead the user never gave.
  EXPECT_EQ(sj::default_signal_lead(60), 15);     // a quarter of the wall time
  EXPECT_EQ(sj::default_signal_lead(400), 100);
  EXPECT_EQ(sj::default_signal_lead(3600), 120);  // capped: enough for any entry of the demo
  auto r = tricky_request();
  r.walltime = "00:01:00";
  r.signal_lead_seconds.reset();
  EXPECT_NO_THROW(sj::validate(r));
  EXPECT_NE(sj::render(r).find("#SBATCH --signal=B:USR1@15\n"), std::string::npos);
  r.signal_lead_seconds = 60;  // given by the user: still checked against the wall time
  EXPECT_THROW(sj::validate(r), spinflip::ConfigError);
}
