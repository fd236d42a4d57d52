"""Whole runs: ``gradients run`` on the simulator's survey, time per stage from ``run.json``.

Each run is a fresh interpreter (``python -m gradients.cli run``) so that its peak resident
memory (``ru_maxrss`` of the child) is the run's own; beside it the estimate that the project
check makes before a run (:func:`gradients.report._memory.run_memory`).

    python benchmarks/bench_report.py --sites 1000 --permutations 999
    python benchmarks/bench_report.py --demo --permutations 9999   # the demo, writing included

Each call appends its rows to ``benchmarks/results_report.md`` with the load average before
and after (the machine is shared: read times beside the load).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from _survey_project import write_project  # noqa: E402

RESULTS = HERE / "results_report.md"


#: Child start-up that sets ``n_jobs=-1`` as the default of every public analysis that has
#: the keyword: what the report's steps get once the defaults are all cores (``--all-cores``).
ALL_CORES = """
import sys, gradients
for name in gradients._EXPORTS:
    f = getattr(gradients, name)
    kw = getattr(f, "__kwdefaults__", None)
    if kw and "n_jobs" in kw:
        kw["n_jobs"] = -1
from gradients.cli import main
sys.exit(main(sys.argv[1:]))
"""


def _run(args: list[str], env: dict[str, str], all_cores: bool = False) -> tuple[float, int]:
    """Run the CLI in a child; return wall seconds and the child's peak RSS (bytes)."""
    start = time.perf_counter()
    head = ["-c", ALL_CORES] if all_cores else ["-m", "gradients.cli"]
    subprocess.run([sys.executable, *head, *args], check=True, env=env)
    wall = time.perf_counter() - start
    peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss * 1024
    return wall, peak


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sites", type=int, default=1000)
    parser.add_argument("--permutations", type=int, default=999)
    parser.add_argument("--demo", action="store_true", help="the bundled demo instead")
    parser.add_argument("--label", default="", help="free text for the table (code version)")
    parser.add_argument("--keep", default=None, help="folder to keep the report in")
    parser.add_argument("--all-cores", action="store_true",
                        help="every analysis defaults to n_jobs=-1 in the child")
    parser.add_argument("--off", default="", metavar="NAME,...",
                        help="analyses switched off ([analyses] NAME = false), e.g. "
                             "partition,ranking,groups for the analyses a run had before them")
    a = parser.parse_args()
    env = dict(os.environ)
    load0 = os.getloadavg()[0]
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(a.keep) if a.keep else Path(tmp) / "report"
        if a.demo:
            args = ["demo", "--out", str(out), "--force", "--permutations", str(a.permutations)]
            what = f"demo (60 sites), {a.permutations} permutations"
            estimate = None
        else:
            from gradients.report._project import load_project

            project = write_project(Path(tmp) / "project", a.sites, permutations=a.permutations)
            off = [v.strip() for v in a.off.split(",") if v.strip()]
            if off:
                text = project.read_text(encoding="utf-8")
                text = text.replace("[analyses]\n", "[analyses]\n"
                                    + "".join(f"{v} = false\n" for v in off), 1)
                project.write_text(text, encoding="utf-8")
                what_off = f", {', '.join(off)} off"
            else:
                what_off = ""
            args = ["run", str(project), "--out", str(out), "--force"]
            what = (f"simulated survey, {a.sites} sites, {a.permutations} permutations"
                    + what_off)
            try:
                from gradients.report._memory import run_memory
            except ImportError:  # a build from before the estimate, for comparison
                estimate = None
            else:
                loaded = load_project(project)
                estimate = run_memory(loaded.settings, a.sites,
                                      n_hypotheses=len(loaded.hypotheses)).total
        wall, peak = _run(args, env, a.all_cores)
        info = json.loads((out / "run.json").read_text(encoding="utf-8"))
    load1 = os.getloadavg()[0]
    timings = info.get("timings", {})
    label = ", ".join(t for t in (a.label, "n_jobs=-1 defaults" if a.all_cores else "") if t)
    lines = [f"\n### {what}{' - ' + label if label else ''}\n",
             f"{time.strftime('%Y-%m-%d %H:%M')}; {platform.machine()}, {os.cpu_count()} cores "
             f"shared; 1-minute load average {load0:.1f} before, {load1:.1f} after. "
             f"Wall time {wall:.1f} s (interpreter start and writing included); peak resident "
             f"memory {peak / 2**20:.0f} MiB"
             + (f" (estimate before the run: {estimate / 2**20:.0f} MiB)" if estimate else "")
             + ".\n",
             "| stage | seconds |", "|---|---:|"]
    lines += [f"| {k} | {v:.1f} |" for k, v in timings.items()]
    text = "\n".join(lines) + "\n"
    print(text)
    with open(RESULTS, "a", encoding="utf-8") as fh:
        fh.write(text)


if __name__ == "__main__":
    main()
