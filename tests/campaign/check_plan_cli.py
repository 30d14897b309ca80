"""`spinflip plan` as a user meets it: entry counts, per-rank memory scaling with
the group size, and exit status 2 with one line naming the key for what cannot
run. Variants of jobs/tiny/campaign.toml are written to a temporary directory."""
import os
import re
import subprocess
import sys
import tempfile
import tomllib

cli = os.environ["SPINFLIP"]
src = os.environ.get("SPINFLIP_SOURCE_DIR", ".")
tiny_path = os.path.join(src, "jobs", "tiny", "campaign.toml")
tiny = open(tiny_path).read()
failures = []


def plan(text, *args):
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "c.toml")
        with open(path, "w") as f:
            f.write(text)
        return subprocess.run([cli, "plan", path, *args], capture_output=True, text=True)


def setting(text, table, key, value):
    """Set key = value in [table] of a campaign text (added if absent)."""
    lines = text.splitlines()
    start = lines.index(f"[{table}]")
    end = next((i for i in range(start + 1, len(lines)) if lines[i].startswith("[")), len(lines))
    for i in range(start + 1, end):
        if re.match(rf"{key}\s*=", lines[i]):
            lines[i] = f"{key} = {value}"
            return "\n".join(lines) + "\n"
    lines.insert(start + 1, f"{key} = {value}")
    return "\n".join(lines) + "\n"


def error_lines(r):
    return [l for l in r.stderr.splitlines() if l.startswith("spinflip: error:")]


# 1. The tiny campaign plans cleanly, with the entry count its designs imply:
#    Σ points × realisations, a stencil having 2 × parameters × step factors points.
spec = tomllib.loads(tiny)
expected = 0
for d in spec["designs"]:
    r = d.get("realisations", 1)
    if d["kind"] in ("latin_hypercube", "sobol"):
        expected += d["points"] * r
    elif d["kind"] == "fiducial":
        expected += r
    elif d["kind"] == "stencil":
        n_par = len(d.get("parameters", spec["parameters"]))
        expected += 2 * n_par * len(d.get("step_factors", [1.0])) * r
r = plan(tiny)
if r.returncode != 0:
    failures.append(f"tiny: exit {r.returncode}: {r.stderr}")
m = re.search(r"^entries: (\d+)", r.stdout, re.M)
if not m or int(m.group(1)) != expected:
    failures.append(f"tiny: entries {m.group(1) if m else '?'}, the designs imply {expected}")


# The probe times one real entry through the driver, in a scratch catalogue it removes.
if "--with-probe" in sys.argv[1:]:
    r = plan(tiny, "--probe")
    m = re.search(r"probe: one entry .* took ([\d.e+-]+) s", r.stdout)
    if r.returncode != 0 or not m or not float(m.group(1)) > 0:
        failures.append(f"--probe: exit {r.returncode}, stdout {r.stdout[-300:]!r}, stderr {r.stderr[-300:]!r}")

# 2. Memory: the generator's slabs divide by the group size (ceil(n_perp/g) rows of
#    axis 0 each); the instrument works on whole cones on every rank and does not
#    (src/instrument/instrument.hpp: "Works on a whole cone in memory").
def memory(text, *args):
    r = plan(text, "--memory-limit-gb", "1000", *args)
    m = re.search(r"generator ([\d.e+]+) MB, instrument ([\d.e+]+) MB", r.stdout)
    if not m:
        failures.append(f"no memory line in: {r.stdout} {r.stderr}")
        return 1.0, 1.0
    return float(m.group(1)), float(m.group(2))


big = setting(setting(tiny, "cone", "n_perp", 64), "cone", "n_los", 512)
g1, i1 = memory(big)
g2, i2 = memory(setting(big, "campaign", "group_size", 2))
g4, i4 = memory(setting(big, "campaign", "group_size", 4))
# Cone of 64² × 512 floats = 8.4 MB; 3 slab fields + δT_b + the ionized flags (¼) + the ModeBins
# table (¼) ≈ 4.5 cones (src/sim/lightcone.cpp).
cone_mb = 64 * 64 * 512 * 4 / 1e6
if not 3.5 * cone_mb < g1 < 5.5 * cone_mb:
    failures.append(f"generator estimate {g1} MB not 3.5–5.5 cones of {cone_mb} MB")
# 64 rows split evenly: exact halves, but for the 0.8 MB of window gains every rank holds whole.
if abs(g2 / g1 - 0.5) > 0.015 or abs(g4 / g1 - 0.25) > 0.02:
    failures.append(f"generator memory does not scale with the group: {g1}, {g2}, {g4} MB")
if abs(i4 - i1) > 0.01 * i1 or not 2.9 * cone_mb < i1 < 3.2 * cone_mb:  # 2 cones + a spectrum ≈ 3.03 cones
    failures.append(f"instrument memory should be whole cones, independent of the group: {i1}, {i2}, {i4} MB")
# run's --group-size overrides campaign.group_size, and plan's estimate follows the same override.
g4_cli, _ = memory(big, "--group-size", "4")
if abs(g4_cli - g4) > 0.01 * g4:
    failures.append(f"plan --group-size 4 estimates {g4_cli} MB for the generator, campaign.group_size = 4 gives {g4}")


# 3. What cannot run: exit 2, one line each, naming the key.
def refused(name, text, keys, *args):
    r = plan(text, *args)
    errs = error_lines(r)
    if r.returncode != 2:
        failures.append(f"{name}: exit {r.returncode}, expected 2; stderr: {r.stderr}")
    for key in keys:
        if not any(key in l for l in errs):
            failures.append(f"{name}: no error line names {key}: {errs}")
    if len(errs) != len(keys):
        failures.append(f"{name}: {len(errs)} error lines for {len(keys)} problems: {errs}")


refused("memory over the limit", tiny, ["campaign.memory_limit_gb"], "--memory-limit-gb", "0.01")
refused("memory over the campaign's limit", setting(tiny, "campaign", "memory_limit_gb", 0.01),
        ["campaign.memory_limit_gb"])
# The tiny cone's channels are ~0.14-0.15 MHz wide (plan prints them): 0.1 MHz is finer.
refused("cadence finer than a channel", setting(setting(tiny, "slices", "cadence_MHz", 0.1), "slices", "width_MHz", 0.05),
        ["slices.cadence_MHz"])
refused("cadence finer than the slice width", setting(tiny, "slices", "width_MHz", 3.0), ["slices.cadence_MHz"])
refused("scattering scales beyond the slice", setting(tiny, "stats.scattering", "scales", 6),
        ["stats.scattering.scales"])
refused("two problems", setting(setting(tiny, "stats.scattering", "scales", 6), "slices", "width_MHz", 3.0),
        ["stats.scattering.scales", "slices.cadence_MHz"])
refused("chunks wider than the band", setting(tiny, "chunks", "bandwidth_MHz", 40.0), ["chunks.bandwidth_MHz"])

# A bad key is a one-line ConfigError from loading (exit 2), naming file:line.
r = plan(tiny.replace("[parameters.ionizing_efficiency]", "[parameters.ionising_efficiency]"))
if r.returncode != 2 or "ionising_efficiency" not in r.stderr or len(r.stderr.strip().splitlines()) != 1:
    failures.append(f"unknown parameter: exit {r.returncode}, stderr {r.stderr!r}")
r = plan(tiny.replace("fiducial = 30.0", "fiducial = 300.0"))
if r.returncode != 2 or "parameters.ionizing_efficiency.fiducial" not in r.stderr or "c.toml:" not in r.stderr:
    failures.append(f"fiducial outside bounds: exit {r.returncode}, stderr {r.stderr!r}")

if failures:
    print("\n".join(failures))
    sys.exit(1)
print(f"plan: {expected} entries, generator {g1:.1f}/{g2:.1f}/{g4:.1f} MB at g=1/2/4, refusals named their keys")
