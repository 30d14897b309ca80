"""Helpers for the `spinflip run` checks: launch the CLI (under mpiexec when asked)."""
import os
import subprocess

SPINFLIP = os.environ["SPINFLIP"]
SOURCE = os.environ["SPINFLIP_SOURCE_DIR"]
MPIEXEC = os.environ.get("MPIEXEC", "mpiexec")
DATA = os.path.join(SOURCE, "tests", "campaign", "data")
TINY = os.path.join(SOURCE, "jobs", "tiny", "campaign.toml")


def command(args, ranks=None):
    """The argv for `spinflip ARGS`, under mpiexec -n RANKS when ranks is given."""
    base = [SPINFLIP, *args]
    return base if ranks is None else [MPIEXEC, "-n", str(ranks), "--oversubscribe", *base]


def spinflip(*args, ranks=None, timeout=300, cwd=None):
    return subprocess.run(command(args, ranks), capture_output=True, text=True, timeout=timeout, cwd=cwd)


class Checks:
    def __init__(self):
        self.failures = []
        self.passed = 0

    def __call__(self, cond, what):
        if cond:
            self.passed += 1
        else:
            self.failures.append(what)
            print("FAIL:", what, flush=True)

    def finish(self):
        print(f"{self.passed} passed, {len(self.failures)} failed")
        raise SystemExit(1 if self.failures else 0)
