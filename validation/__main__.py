"""``python -m validation``: run the validation families and write their tables and figures.

See the package docstring (``validation/__init__.py``) for what each family checks.
"""

from __future__ import annotations

import argparse
import importlib
import json
import os
import platform
import re
import sys
import time
from pathlib import Path

# One thread per kernel: the machine is shared, and the rates do not depend on it.
for _var in ("NUMBA_NUM_THREADS", "OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:  # run from anywhere: the repository's gradients and validation
    sys.path.insert(0, str(ROOT))

from validation import FAMILIES  # noqa: E402
from validation._common import FULL, QUICK, null_markdown, power_markdown  # noqa: E402
from validation._figures import save  # noqa: E402

DOC = ROOT / "docs" / "validation.md"
FIGURES = ROOT / "docs" / "figures" / "validation"
RESULTS = ROOT / "validation" / "results"
MARK = re.compile(r"(<!-- validation:(?P<key>[\w:.-]+) -->\n)(?P<body>.*?)"
                  r"(<!-- /validation:(?P=key) -->)", re.S)


def render_family(name: str, tables: dict):
    """Blocks (generated Markdown) and figures of one family's tables."""
    result = importlib.import_module(f"validation.{name}").render(tables)
    blocks = dict(result.blocks)
    if "null" in result.tables and not result.tables["null"].empty:
        blocks.setdefault(f"{name}:null", null_markdown(result.tables["null"]))
    if "power" in result.tables and not result.tables["power"].empty:
        blocks.setdefault(f"{name}:power", power_markdown(result.tables["power"]))
    result.blocks = blocks
    return result


def load_tables(name: str, folder: Path = RESULTS) -> dict:
    import pandas as pd

    prefix = f"{name}_"
    return {p.stem[len(prefix):]: pd.read_csv(p) for p in sorted(folder.glob(f"{prefix}*.csv"))}


def write_docs(blocks: dict[str, str], doc: Path = DOC) -> list[str]:
    """Replace the generated blocks of ``doc``; returns the keys it has no marker for."""
    text = doc.read_text(encoding="utf-8")
    seen = set()

    def swap(m: re.Match) -> str:
        key = m.group("key")
        if key not in blocks:
            return m.group(0)
        seen.add(key)
        return m.group(1) + blocks[key].rstrip("\n") + "\n" + m.group(4)

    doc.write_text(MARK.sub(swap, text), encoding="utf-8")
    return sorted(set(blocks) - seen)


def run_block(log: dict) -> str:
    lines = ["| family | command | data sets (null / power) | permutations | time (s) | "
             "CPU (s) | run on |", "|---|---|---|---|---|---|---|"]
    for name in FAMILIES:
        if name in log:
            e = log[name]
            lines.append(f"| {name} | `python -m validation --only {name} --seed {e['seed']}` | "
                         f"{e['datasets']} | {e['permutations']} | {e['seconds']:.0f} | "
                         f"{e['cpu']:.0f} | {e['date']} |")
    wall = sum(log[k]["seconds"] for k in log if k in FAMILIES)
    cpu = sum(log[k]["cpu"] for k in log if k in FAMILIES)
    lines += ["", f"Total {wall:.0f} s ({cpu:.0f} s of CPU) on {log.get('machine', '')}, "
              "one thread per kernel, at nice 10."]
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m validation",
                                     description="Simulated calibration and power of every "
                                                 "permutation test of gradients.")
    parser.add_argument("--quick", action="store_true",
                        help="a few data sets per cell; print only (unless --out)")
    parser.add_argument("--only", nargs="+", choices=FAMILIES, metavar="NAME",
                        help=f"families to run (default all): {', '.join(FAMILIES)}")
    parser.add_argument("--seed", type=int, default=2026, help="root seed (default 2026)")
    parser.add_argument("--out", type=Path, default=None,
                        help="write tables (CSV, Markdown) and figures here instead of the docs")
    parser.add_argument("--render", action="store_true",
                        help="simulate nothing: redraw the docs' tables and figures from "
                             "validation/results/*.csv")
    args = parser.parse_args(argv)
    names = args.only or list(FAMILIES)
    write_repo = not args.quick and args.out is None
    log_path = RESULTS / "run.json"
    log = json.loads(log_path.read_text()) if (write_repo and log_path.exists()) else {}
    for name in names:
        print(f"== {name}", flush=True)
        if args.render:
            tables, seconds, budget = load_tables(name), None, None
            if not tables:
                print(f"no results for {name} under {RESULTS}")
                continue
        else:
            budget = QUICK if args.quick else FULL
            start, cpu = time.perf_counter(), time.process_time()
            module = importlib.import_module(f"validation.{name}")
            tables = module.simulate(budget, args.seed)
            seconds = time.perf_counter() - start
            cpu = time.process_time() - cpu
        result = render_family(name, tables)
        for key, text in result.blocks.items():
            print(f"\n-- {key}\n{text}")
        for note in result.notes:
            print(f"note: {note}")
        if seconds is not None:
            print(f"({seconds:.0f} s, {cpu:.0f} s of CPU)", flush=True)
        tables_dir = RESULTS if write_repo else args.out
        figures_dir = FIGURES if write_repo else args.out
        if tables_dir is not None:
            tables_dir.mkdir(parents=True, exist_ok=True)
            if not args.render:
                for tname, table in result.tables.items():
                    table.to_csv(tables_dir / f"{name}_{tname}.csv", index=False,
                                 float_format="%.6g")
            for fname, fig in result.figures.items():
                save(fig, figures_dir / f"{fname}.png")
        if args.out is not None:
            (args.out / f"{name}.md").write_text(
                "\n\n".join(f"<!-- {k} -->\n{v}" for k, v in result.blocks.items()) + "\n",
                encoding="utf-8")
        if write_repo:
            missing = write_docs(result.blocks)
            if missing:
                print(f"docs/validation.md has no marker for: {', '.join(missing)}")
            if budget is not None:
                heavy = name == "fitting"
                log[name] = {"seed": args.seed, "seconds": round(seconds, 1),
                             "cpu": round(cpu, 1),
                             "datasets": f"{budget.datasets} / {budget.power}"
                             + (f" (surfaces {budget.heavy})" if heavy else ""),
                             "permutations": f"{budget.permutations}"
                             + (f" (surfaces {budget.heavy_permutations})" if heavy else ""),
                             "date": time.strftime("%Y-%m-%d")}
                if name == "decay":  # no test and no power: data sets and bootstrap samples
                    log[name].update(datasets=f"{budget.datasets}",
                                     permutations=f"{budget.permutations} bootstrap samples")
                log["machine"] = (f"{platform.machine()}, {os.cpu_count()} cores shared with "
                                  f"other work, Python {platform.python_version()}")
                log_path.parent.mkdir(parents=True, exist_ok=True)
                log_path.write_text(json.dumps(log, indent=1) + "\n")
            write_docs({"run": run_block(log)})
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
