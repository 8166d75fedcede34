"""Speed benchmark of ``forebrief score`` against a minimal pandas + scoringrules pipeline.

A script, not a test. It writes seeded, invented data into ``benchmarks/_data/`` (git-ignored):
about a million quantile rows (25 models with their own bias and spread, 50 regions,
2 quantities, 5 weekly issue dates on Mondays, 4 horizons to Saturdays, the 23 standard
levels) and an observation file with two vintages per week (``reported``). A few rows are
made faulty on purpose (crossing quantiles, a negative value, a bad date) so that validation
and ``excluded.csv`` have work to do.

It then times, each as its own subprocess (wall clock, imports included, best of R):

(a) ``forebrief score --forecasts F --observations O --as-of D --baseline B --out DIR``;
(b) a minimal reference: pandas ``read_csv`` of both files, the vintage as of D, a pivot of
    the quantiles to wide, a merge with the observations, WIS per forecast with
    ``scoringrules.weighted_interval_score(..., backend="numba")``, mean WIS per model, one CSV.

and prints both times, the ratio (target: at most 2), forebrief's peak memory and a breakdown
of forebrief's own stages measured in a fresh process. As a consistency check it compares
the reference's mean WIS per model with the mean of forebrief's ``scores_by_item.csv``.

Run ``python benchmarks/bench_score.py [--rows N] [--repeat R] [--profile]``.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
DATA = HERE / "_data"
FIRST_ISSUE = "2027-01-04"  # a Monday
N_ISSUES = 5
N_HORIZONS = 4
N_REGIONS = 50
QUANTITIES = ("cases", "admissions")
BASELINE = "lab01"
SEED = 20270104


# --------------------------------------------------------------------------------------------
# data


def _plan(rows: int) -> tuple[int, int]:
    """Number of models giving about ``rows`` rows (23 levels per forecast), and the row count."""
    per_model = N_REGIONS * len(QUANTITIES) * N_ISSUES * N_HORIZONS * 23
    n_models = max(2, round(rows / per_model))
    return n_models, n_models * per_model


def make_data(rows: int) -> tuple[Path, Path, str]:
    """Write (once) the forecast and observation CSVs; return their paths and the as-of date.

    Invented data: per region and quantity a log-scale random walk for the weekly counts;
    each model's quantiles are lognormal-shaped around a noisy median with the model's own
    bias and spread factor, so quantiles never decrease and never go below 0. O(rows).
    """
    import numpy as np
    import pandas as pd
    from scipy.stats import norm

    from forebrief.tables.schema import STANDARD_LEVELS

    n_models, n_rows = _plan(rows)
    DATA.mkdir(parents=True, exist_ok=True)
    f_path = DATA / f"forecasts_{n_rows}.csv"
    o_path = DATA / f"observations_{n_rows}.csv"
    first_issue = pd.Timestamp(FIRST_ISSUE)
    last_week = first_issue + pd.Timedelta(days=7 * (N_ISSUES - 1 + N_HORIZONS) - 2)
    as_of = last_week + pd.Timedelta(days=3)  # the Tuesday after the last target week
    if f_path.exists() and o_path.exists():
        return f_path, o_path, f"{as_of:%Y-%m-%d}"

    rng = np.random.default_rng(SEED)
    levels = np.asarray(STANDARD_LEVELS)
    n_q = len(QUANTITIES)
    # weeks: the Saturday before the first issue, then weekly to the last target
    n_weeks = N_ISSUES + N_HORIZONS + 1
    weeks = first_issue - pd.Timedelta(days=2) + pd.to_timedelta(7 * np.arange(n_weeks), "D")
    start = rng.uniform(np.log(20), np.log(3000), (N_REGIONS, n_q))
    steps = rng.normal(0.0, 0.15, (N_REGIONS, n_q, n_weeks))
    truth = np.exp(start[..., None] + np.cumsum(steps, axis=2))
    observed = np.round(truth)
    models = np.array([f"lab{k:02d}" for k in range(1, n_models + 1)])
    bias = rng.normal(0.0, 0.15, n_models)
    spread = rng.uniform(0.5, 1.8, n_models)
    bias[0], spread[0] = 0.0, 1.0  # the baseline: unbiased, average spread
    z = norm.ppf(levels)

    # one forecast per (model, region, quantity, issue, horizon)
    m, r, q, i, h = (
        a.reshape(-1)
        for a in np.meshgrid(
            np.arange(n_models),
            np.arange(N_REGIONS),
            np.arange(n_q),
            np.arange(N_ISSUES),
            np.arange(1, N_HORIZONS + 1),
            indexing="ij",
        )
    )
    target = i + h  # index into weeks: issue i is two days after week i
    last_known = observed[r, q, i]
    noise = rng.normal(0.0, 0.1 * np.sqrt(h), m.size)
    centre = np.log(last_known + 1.0) + bias[m] * h + noise
    sigma = 0.18 * np.sqrt(h) * spread[m]
    values = np.round(np.expm1(centre[:, None] + sigma[:, None] * z[None, :]).clip(min=0), 2)
    values = np.maximum.accumulate(values, axis=1)

    issued = first_issue + pd.to_timedelta(7 * i, "D")
    frame = pd.DataFrame(
        {
            "model": np.repeat(models[m], levels.size),
            "region": np.repeat(
                np.array([f"district-{k:02d}" for k in range(1, N_REGIONS + 1)])[r], levels.size
            ),
            "quantity": np.repeat(np.asarray(QUANTITIES)[q], levels.size),
            "issued": np.repeat(issued.strftime("%Y-%m-%d").to_numpy(), levels.size),
            "week_ending": np.repeat(weeks[target].strftime("%Y-%m-%d").to_numpy(), levels.size),
            "level": np.tile(levels, m.size),
            "value": values.reshape(-1),
        }
    )
    # a few faulty forecasts, as real submissions have them
    bad = rng.choice(m.size, size=6, replace=False) * levels.size
    frame.loc[bad[0] + 10, "value"] = frame.loc[bad[0] + 9, "value"] - 5.0  # crossing
    frame.loc[bad[1] + 11, "value"] = frame.loc[bad[1] + 12, "value"] + 50.0  # crossing
    frame.loc[bad[2], "value"] = -1.0  # negative count
    frame.loc[bad[3] + 4, "issued"] = "2027-02-30"  # not a date
    frame.loc[bad[4] + 7, "value"] = float("nan")  # empty cell
    frame.loc[bad[5] + 3, "level"] = 1.5  # level out of range
    frame.to_csv(f_path, index=False, lineterminator="\n")

    # observations: a first report three days after the week, a revision a week later
    rr, qq, ww = (
        a.reshape(-1)
        for a in np.meshgrid(
            np.arange(N_REGIONS), np.arange(n_q), np.arange(n_weeks), indexing="ij"
        )
    )
    first = observed[rr, qq, ww]
    revised = np.round(first * rng.uniform(1.0, 1.15, first.size))
    obs = pd.DataFrame(
        {
            "region": np.tile(
                np.array([f"district-{k:02d}" for k in range(1, N_REGIONS + 1)])[rr], 2
            ),
            "quantity": np.tile(np.asarray(QUANTITIES)[qq], 2),
            "week_ending": np.tile(weeks[ww].strftime("%Y-%m-%d").to_numpy(), 2),
            "reported": np.concatenate(
                [
                    (weeks[ww] + pd.Timedelta(days=3)).strftime("%Y-%m-%d"),
                    (weeks[ww] + pd.Timedelta(days=10)).strftime("%Y-%m-%d"),
                ]
            ),
            "value": np.concatenate([first, revised]),
        }
    ).sort_values(["region", "quantity", "week_ending", "reported"], kind="stable")
    obs.to_csv(o_path, index=False, lineterminator="\n", float_format="%.10g")
    return f_path, o_path, f"{as_of:%Y-%m-%d}"


# --------------------------------------------------------------------------------------------
# the reference pipeline (run as ``python -c``, so its imports are timed too)

REFERENCE = r"""
import sys
import numpy as np
import pandas as pd
import scoringrules as sr

f_path, o_path, as_of, out = sys.argv[1:5]
fc = pd.read_csv(f_path)
obs = pd.read_csv(o_path)
obs = obs.loc[pd.to_datetime(obs["reported"]) <= pd.Timestamp(as_of)]
obs = obs.sort_values("reported").drop_duplicates(["region", "quantity", "week_ending"],
                                                  keep="last")
keys = ["model", "region", "quantity", "issued", "week_ending"]
wide = fc.pivot_table(index=keys, columns="level", values="value", aggfunc="first")
wide = wide.reset_index().merge(obs[["region", "quantity", "week_ending", "value"]],
                                on=["region", "quantity", "week_ending"])
lv = np.array([c for c in wide.columns if isinstance(c, float) and 0 < c < 1])
lower = lv[lv < 0.5]
upper = lv[lv > 0.5][::-1]
wide["wis"] = sr.weighted_interval_score(
    wide["value"].to_numpy(float), wide[0.5].to_numpy(float),
    wide[list(lower)].to_numpy(float), wide[list(upper)].to_numpy(float), 2 * lower,
    backend="numba",
)
wide.groupby("model")["wis"].mean().reset_index().to_csv(out, index=False)
"""

#: The same pipeline with WIS in numpy (Bracher et al. 2021, PLOS Comput Biol, eq. 3), to show
#: how much of (b) is the import and compilation of scoringrules' numba functions.
REFERENCE_NUMPY = REFERENCE.replace("import scoringrules as sr\n", "").replace(
    """wide["wis"] = sr.weighted_interval_score(
    wide["value"].to_numpy(float), wide[0.5].to_numpy(float),
    wide[list(lower)].to_numpy(float), wide[list(upper)].to_numpy(float), 2 * lower,
    backend="numba",
)""",
    """y = wide["value"].to_numpy(float)[:, None]
lo, hi = wide[list(lower)].to_numpy(float), wide[list(upper)].to_numpy(float)
a = 2 * lower
score = (hi - lo) + 2 / a * (np.maximum(lo - y, 0) + np.maximum(y - hi, 0))
wide["wis"] = (0.5 * np.abs(y[:, 0] - wide[0.5].to_numpy(float))
               + (a / 2 * score).sum(axis=1)) / (a.size + 0.5)""",
)


# --------------------------------------------------------------------------------------------
# forebrief's stages, in a fresh process

STAGES = r"""
import sys, time, json
t0 = time.perf_counter()
import pandas as pd
from forebrief.io.outputs import write_tables
from forebrief.io.tables import read_raw_table, resolve_inputs
from forebrief.tables.scoring import ScoreSettings, score_forecasts
from forebrief.tables.validate import cross_check, validate_forecasts, validate_observations
from forebrief.app.workflow import Inputs
t1 = time.perf_counter()
f_path, o_path, as_of, baseline, out = sys.argv[1:6]
as_of = pd.Timestamp(as_of)
raw_f = [read_raw_table(p) for p in resolve_inputs(f_path)]
raw_o = [read_raw_table(p) for p in resolve_inputs(o_path)]
t2 = time.perf_counter()
f = validate_forecasts(raw_f)
o = validate_observations(raw_o, as_of=as_of)
inputs = Inputs(f, o, (*f.problems, *o.problems, *cross_check(f, o)))
t3 = time.perf_counter()
result = score_forecasts(f.table, o.table, as_of=as_of, settings=ScoreSettings(baseline=baseline))
t4 = time.perf_counter()
from pathlib import Path
write_tables({"scores_by_model.csv": result.by_model,
              "scores_by_model_region.csv": result.by_model_region,
              "scores_by_item.csv": result.by_item, "excluded.csv": inputs.excluded}, Path(out))
lines = [p.line() for p in inputs.problems]
t5 = time.perf_counter()
print(json.dumps({"import": t1 - t0, "read": t2 - t1, "validate": t3 - t2, "score": t4 - t3,
                  "write": t5 - t4, "total": t5 - t0}))
"""


# --------------------------------------------------------------------------------------------
# timing


def _timed(cmd: list[str]) -> tuple[float, int]:
    """Wall-clock seconds and peak resident memory (KiB; 0 if unknown) of one subprocess."""
    use_time = Path("/usr/bin/time").exists()
    with tempfile.NamedTemporaryFile(suffix=".txt", delete=False) as fh:
        mem_file = fh.name
    full = ["/usr/bin/time", "-f", "%M", "-o", mem_file, *cmd] if use_time else cmd
    t0 = time.perf_counter()
    done = subprocess.run(full, capture_output=True, text=True, check=False)
    elapsed = time.perf_counter() - t0
    if done.returncode != 0:
        sys.stderr.write(done.stdout + done.stderr)
        raise SystemExit(f"command failed ({done.returncode}): {' '.join(cmd)}")
    peak = 0
    if use_time:
        text = Path(mem_file).read_text().strip().splitlines()
        peak = int(text[-1]) if text and text[-1].isdigit() else 0
    Path(mem_file).unlink(missing_ok=True)
    return elapsed, peak


def _forebrief_exe() -> list[str]:
    exe = shutil.which("forebrief")
    return [exe] if exe else [sys.executable, "-m", "forebrief.cli"]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--rows",
        type=int,
        default=1_150_000,
        help="about this many rows (default 1,150,000: 25 models)",
    )
    parser.add_argument("--repeat", type=int, default=3, help="best of R runs (default 3)")
    parser.add_argument(
        "--profile",
        action="store_true",
        help="also profile forebrief score in-process (cProfile, top 30)",
    )
    args = parser.parse_args()

    f_path, o_path, as_of = make_data(args.rows)
    n_rows = sum(1 for _ in f_path.open()) - 1
    out = DATA / "out_forebrief"
    ref_out = DATA / "out_reference.csv"
    fb_cmd = [
        *_forebrief_exe(),
        "score",
        "--forecasts",
        str(f_path),
        "--observations",
        str(o_path),
        "--as-of",
        as_of,
        "--baseline",
        BASELINE,
        "--out",
        str(out),
    ]
    ref_cmd = [sys.executable, "-c", REFERENCE, str(f_path), str(o_path), as_of, str(ref_out)]
    np_out = DATA / "out_reference_numpy.csv"
    np_cmd = [sys.executable, "-c", REFERENCE_NUMPY, str(f_path), str(o_path), as_of, str(np_out)]

    # one untimed run of each warms the disk cache and numba's on-disk cache, if any
    _timed(fb_cmd)
    _timed(ref_cmd)
    fb_runs = [_timed(fb_cmd) for _ in range(args.repeat)]
    ref_runs = [_timed(ref_cmd) for _ in range(args.repeat)]
    np_runs = [_timed(np_cmd) for _ in range(args.repeat)]
    np_best = min(t for t, _ in np_runs)
    fb_best = min(t for t, _ in fb_runs)
    ref_best = min(t for t, _ in ref_runs)
    fb_peak = max(p for _, p in fb_runs)
    ref_peak = max(p for _, p in ref_runs)

    stage_out = DATA / "out_stages"
    stage_runs = []
    for _ in range(args.repeat):
        done = subprocess.run(
            [
                sys.executable,
                "-c",
                STAGES,
                str(f_path),
                str(o_path),
                as_of,
                BASELINE,
                str(stage_out),
            ],
            capture_output=True,
            text=True,
            check=True,
        )
        stage_runs.append(json.loads(done.stdout.strip().splitlines()[-1]))
    stages = min(stage_runs, key=lambda s: s["total"])

    print(
        f"data: {n_rows:,} forecast rows ({f_path.stat().st_size / 2**20:.0f} MiB), "
        f"as of {as_of}, baseline {BASELINE}; {os.cpu_count()} cores; best of {args.repeat}"
    )
    print(f"(a) forebrief score     {fb_best:7.2f} s   peak memory {fb_peak / 2**20:.2f} GiB")
    print(f"(b) pandas+scoringrules {ref_best:7.2f} s   peak memory {ref_peak / 2**20:.2f} GiB")
    print(f"ratio (a)/(b)           {fb_best / ref_best:7.2f}   (target <= 2)")
    print(
        f"(b') the same, WIS in numpy (no scoringrules import) {np_best:.2f} s; "
        f"ratio (a)/(b') {fb_best / np_best:.2f}"
    )
    print(
        "forebrief stages in-process (s): " + ", ".join(f"{k} {v:.2f}" for k, v in stages.items())
    )
    _consistency(out / "scores_by_item.csv", ref_out)
    _consistency(out / "scores_by_item.csv", np_out)
    if args.profile:
        _profile(f_path, o_path, as_of, DATA / "out_profile")


def _consistency(by_item: Path, ref_out: Path) -> None:
    """Mean WIS per model: forebrief's item table against the reference's per-model table."""
    import numpy as np
    import pandas as pd

    ours = pd.read_csv(by_item).groupby("model")["wis"].mean()
    ref = pd.read_csv(ref_out).set_index("model")["wis"]
    both = pd.concat([ours, ref], axis=1, keys=["ours", "ref"]).dropna()
    worst = float(np.max(np.abs(both["ours"] / both["ref"] - 1.0)))
    print(
        f"check: mean WIS per model, forebrief vs reference: {len(both)} models, "
        f"largest relative difference {worst:.2e} (the reference also scores the "
        "quarantined forecasts)"
    )


def _profile(f_path: Path, o_path: Path, as_of: str, out: Path) -> None:
    import cProfile
    import pstats

    from forebrief.cli import main as cli_main

    argv = [
        "score",
        "--forecasts",
        str(f_path),
        "--observations",
        str(o_path),
        "--as-of",
        as_of,
        "--baseline",
        BASELINE,
        "--out",
        str(out),
        "-q",
    ]
    prof = cProfile.Profile()
    prof.runcall(cli_main, argv)
    pstats.Stats(prof).sort_stats("cumulative").print_stats(30)


if __name__ == "__main__":
    main()
