"""Per-run compute: CPU time of each stage of one 500-peak run, warm process.

Prints, for generated 500-peak named runs (dha.synthetic, the same runs as
``bench_batch.py``; plumbing and speed only, never accuracy), the CPU milliseconds of each
stage (read, identify, quantify, groups, each property model, result, octane contributions,
checks, JSON text), the minimum over three passes of the mean over N runs (CPU time, so the
figures mean something on a shared machine), and the sum. Issue 15's budget on two cores:
1,000 runs/min = at most about 120 ms CPU per run for everything.

    .venv/bin/python benchmarks/bench_run_compute.py [N]
"""
from __future__ import annotations

import importlib
import os
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_batch import make_runs  # noqa: E402  (the batch benchmark's generated runs)


def stage_cpu_ms(paths: list[Path]) -> dict[str, float]:
    """Mean CPU ms per stage over ``paths`` (one pass)."""
    from dha import properties, specs
    from dha.explain import result_keys
    from dha.groups import group_totals
    from dha.identify import identify
    from dha.library import load_library
    from dha.quantify import quantify_run
    from dha.reader import read_input
    from dha.result import build_result, dumps
    from dha.settings import load_settings

    settings, lib = load_settings(), load_library()
    profile = specs.load_profile(settings["report"]["spec"])
    acc: dict[str, float] = {}

    def tick(name: str, t0: float) -> float:
        now = time.process_time()
        acc[name] = acc.get(name, 0.0) + (now - t0) * 1000.0
        return now

    for p in paths:
        t = time.process_time()
        run = read_input(p, settings)[0]
        t = tick("read", t)
        ident = identify(run.table, lib, settings)
        attrs = dict(ident.attrs)
        t = tick("identify", t)
        quant = quantify_run(run, ident, lib, settings)
        t = tick("quantify", t)
        groups = group_totals(quant.table, lib, settings)
        t = tick("groups", t)
        props = []
        for name in properties.MODELS:
            module = importlib.import_module(name)
            props.append((name.rsplit(".", 1)[-1], module.compute(quant.table, lib, settings)))
            t = tick("property " + name.rsplit(".", 1)[-1], t)
        result = build_result(run, quant, groups, props, lib, settings,
                              identification=attrs or None)
        t = tick("build result", t)
        result.update(result_keys(quant.table, lib, settings, result["properties"]))
        t = tick("octane contributions", t)
        specs.check(result, profile, lib)
        t = tick("checks", t)
        dumps(result)
        tick("JSON text", t)
    return {k: v / len(paths) for k, v in acc.items()}


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 8
    print(f"load average {os.getloadavg()[0]:.1f} at start (CPU times; other processes share "
          "the cores)")
    with tempfile.TemporaryDirectory() as tmp:
        paths = make_runs(Path(tmp) / "runs", n)
        from dha.pipeline import process_file
        from dha.library import load_library
        from dha.settings import load_settings
        process_file(paths[0], load_settings(), load_library())      # warm-up
        passes = [stage_cpu_ms(paths) for _ in range(3)]
    best = {k: min(p[k] for p in passes) for k in passes[0]}
    print(f"CPU per stage of one generated 500-peak run, warm (min of 3 passes, mean of {n} "
          "runs) [ms]:")
    for k, v in best.items():
        print(f"  {k:<28} {v:8.1f}")
    print(f"  {'total':<28} {sum(best.values()):8.1f}   (budget for 1,000 runs/min on 2 cores: "
          "about 120 ms with the batch's own work)")


if __name__ == "__main__":
    main()
