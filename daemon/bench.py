"""``brayscope bench``: how fast the vectorised reconstruction is, and whether it agrees.

The command

1. builds ``--base-points`` operating points of a KR-GT1-like machine at random (ambient -10 to
   40 degC, RH 0.2 to 0.9, pressure ratio 10 to 22, turbine inlet 1350 to 1700 K, compressor
   efficiency 0.84 to 0.90, turbine efficiency 0.86 to 0.92, pipeline gas) and turns each into
   sensor values with the independent Cantera forward model (``tests/cantera_engine.py``);
2. resamples those to ``--snapshots`` snapshots with small sensor jitter (so the batch is not
   one point repeated), seeded by ``--seed``;
3. times the vectorised reconstruction (``GAS_TURBINE.compute`` of
   ``models.units.gas_turbine.schema``) on the whole batch in a child process pinned to one CPU
   with ``OMP_NUM_THREADS``, ``OPENBLAS_NUM_THREADS`` and ``MKL_NUM_THREADS`` set to 1 (best of
   ``--repeats``);
4. times the per-snapshot Cantera reconstruction (``reconstruct_one``: the same equations, one
   Cantera property call after another) on the first ``--loop-sample`` snapshots;
5. prints both rates, their ratio and the largest difference of the compressor and turbine
   isentropic efficiencies between the two on the sample, each against its target.

Targets: vectorised >= 1 000 000 snapshots/s on one core, >= 100 times the loop, largest
efficiency difference <= 0.01 points.  Exit codes: 0 all targets met, 1 a target missed,
2 Cantera (a test dependency) or the test helper is not available, or bad options.

Cantera is imported only when the command runs: ``brayscope --help`` imports every command
module and must not need it.
"""

from __future__ import annotations

import argparse
import importlib
import importlib.util
import json
import os
import platform
import subprocess
import sys
import tempfile
import time
from collections.abc import Mapping, Sequence
from pathlib import Path
from types import ModuleType
from typing import Any

import numpy as np

from daemon.cli import CAUTION

__all__ = [
    "BENCH_FUEL",
    "EXIT_FAIL",
    "EXIT_OK",
    "EXIT_UNAVAILABLE",
    "TARGET_DEVIATION_POINTS",
    "TARGET_RATE",
    "TARGET_RATIO",
    "add_parser",
    "load_engine",
    "make_snapshots",
    "run",
]

EXIT_OK = 0
EXIT_FAIL = 1
EXIT_UNAVAILABLE = 2

#: Vectorised snapshots per second on one core.
TARGET_RATE = 1_000_000.0
#: Vectorised rate over the per-snapshot Cantera loop rate.
TARGET_RATIO = 100.0
#: Largest |difference| of an isentropic efficiency, vectorised vs loop [percentage points].
TARGET_DEVIATION_POINTS = 0.01

#: Invented pipeline-gas analysis of the Kestrel Ridge Energy Park supply (mole fractions).
BENCH_FUEL: Mapping[str, float] = {
    "CH4": 0.9300,
    "C2H6": 0.0350,
    "C3H8": 0.0080,
    "n-C4H10": 0.0020,
    "N2": 0.0150,
    "CO2": 0.0100,
}
#: Unit parameters of the benchmark machine (invented, KR-GT1-like).
BENCH_PARAMETERS: Mapping[str, float] = {
    "generator_efficiency": 0.985,
    "combustor_pressure_loss": 0.04,
    "combustion_efficiency": 0.998,
    "casing_heat_loss_fraction": 0.003,
}

#: Measurement names passed to the reconstruction, in array-column order.
FIELDS: tuple[str, ...] = (
    "ambient_temperature",
    "ambient_pressure",
    "ambient_relative_humidity",
    "compressor_inlet_temperature",
    "compressor_inlet_pressure",
    "compressor_discharge_temperature",
    "compressor_discharge_pressure",
    "exhaust_temperature",
    "exhaust_pressure",
    "fuel_mass_flow",
    "generator_power",
    "fuel_temperature",
)
#: Relative (flows, power, pressures) or absolute (temperatures [K], RH [1]) jitter, 1 sigma.
_JITTER: Mapping[str, tuple[str, float]] = {
    "ambient_temperature": ("abs", 0.05),
    "ambient_pressure": ("rel", 5e-5),
    "ambient_relative_humidity": ("abs", 0.002),
    "compressor_inlet_temperature": ("abs", 0.05),
    "compressor_inlet_pressure": ("rel", 5e-5),
    "compressor_discharge_temperature": ("abs", 0.1),
    "compressor_discharge_pressure": ("rel", 1e-4),
    "exhaust_temperature": ("abs", 0.2),
    "exhaust_pressure": ("rel", 5e-5),
    "fuel_mass_flow": ("rel", 5e-4),
    "generator_power": ("rel", 5e-4),
    "fuel_temperature": ("abs", 0.1),
}
#: Results compared between the two paths, with the scale that turns them into report units.
_COMPARED: Mapping[str, tuple[float, str]] = {
    "compressor_isentropic_efficiency": (100.0, "points"),
    "turbine_isentropic_efficiency": (100.0, "points"),
    "turbine_inlet_temperature": (1.0, "K"),
    "air_mass_flow": (1.0, "kg/s"),
}
_THREAD_VARS = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMEXPR_NUM_THREADS")


def add_parser(subparsers: Any) -> None:
    """Register ``brayscope bench``."""
    p = subparsers.add_parser(
        "bench",
        help="measure reconstruction speed against a per-snapshot Cantera loop (needs cantera)",
        description=(
            "Times the vectorised gas-turbine reconstruction on one core against a "
            "per-snapshot Cantera reconstruction of the same equations, and checks that the "
            "two agree. Needs the test dependency cantera and the repository's tests/ "
            "directory. " + CAUTION
        ),
        epilog=(
            "targets: >= 1,000,000 snapshots/s vectorised on one core, >= 100x the loop,\n"
            "efficiency difference <= 0.01 points.  Exit 0 all met, 1 a target missed,\n"
            "2 cantera missing.\n\n"
            "examples:\n"
            "  brayscope bench                         the default run (1e6 snapshots)\n"
            "  brayscope bench --snapshots 200000 --loop-sample 500   a quicker look\n"
            "  brayscope bench --json > bench.json     the figures as one JSON object"
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument(
        "--snapshots",
        type=int,
        default=1_000_000,
        help="snapshots in the vectorised batch (default 1000000)",
    )
    p.add_argument(
        "--loop-sample",
        type=int,
        default=2000,
        help="snapshots reconstructed one by one with Cantera (default 2000)",
    )
    p.add_argument(
        "--base-points",
        type=int,
        default=300,
        help="operating points simulated with the Cantera forward model (default 300)",
    )
    p.add_argument("--seed", type=int, default=20240611, help="random seed (default 20240611)")
    p.add_argument(
        "--repeats", type=int, default=3, help="timed repeats of the vectorised batch (best kept)"
    )
    p.add_argument("--json", action="store_true", help="print the figures as one JSON object")


# ------------------------------------------------------------------------------------------
# helpers
# ------------------------------------------------------------------------------------------
def load_engine() -> ModuleType | None:
    """Import ``tests/cantera_engine.py`` of this checkout, or None when unavailable.

    The engine is a test helper, not part of the installed package: the bench runs from a
    source checkout.  Returns None when Cantera or the file is missing.
    """
    try:
        importlib.import_module("cantera")
    except ImportError:
        return None
    path = Path(__file__).resolve().parents[1] / "tests" / "cantera_engine.py"
    if not path.is_file():
        return None
    spec = importlib.util.spec_from_file_location("brayscope_cantera_engine", path)
    if spec is None or spec.loader is None:  # pragma: no cover
        return None
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module


def _base_points(engine: ModuleType, n: int, rng: np.random.Generator) -> list[dict[str, Any]]:
    """Forward-simulate ``n`` random operating points with the Cantera model."""
    out = []
    for _ in range(n):
        op = engine.OperatingPoint(
            ambient_temperature=float(rng.uniform(263.15, 313.15)),
            ambient_pressure=float(rng.uniform(96_000.0, 103_000.0)),
            ambient_relative_humidity=float(rng.uniform(0.2, 0.9)),
            pressure_ratio=float(rng.uniform(10.0, 22.0)),
            compressor_efficiency=float(rng.uniform(0.84, 0.90)),
            turbine_inlet_temperature=float(rng.uniform(1350.0, 1700.0)),
            turbine_efficiency=float(rng.uniform(0.86, 0.92)),
            air_mass_flow=float(rng.uniform(110.0, 150.0)),
            fuel=dict(BENCH_FUEL),
            fuel_temperature=float(rng.uniform(290.0, 320.0)),
            combustion_efficiency=BENCH_PARAMETERS["combustion_efficiency"],
            combustor_pressure_loss=BENCH_PARAMETERS["combustor_pressure_loss"],
            generator_efficiency=BENCH_PARAMETERS["generator_efficiency"],
            casing_heat_loss_fraction=BENCH_PARAMETERS["casing_heat_loss_fraction"],
        )
        out.append(engine.forward(op)["measurements"])
    return out


def make_snapshots(
    base: Sequence[Mapping[str, float]], n: int, rng: np.random.Generator
) -> dict[str, np.ndarray]:
    """Resample ``base`` measurement sets to ``n`` snapshots with Gaussian sensor jitter."""
    table = np.array([[b[f] for f in FIELDS] for b in base], dtype=np.float64)
    idx = rng.integers(0, len(base), size=n)
    out: dict[str, np.ndarray] = {}
    for j, name in enumerate(FIELDS):
        kind, sigma = _JITTER[name]
        col = table[idx, j]
        noise = rng.standard_normal(n)
        col = col * (1.0 + sigma * noise) if kind == "rel" else col + sigma * noise
        if name == "ambient_relative_humidity":
            col = np.clip(col, 0.0, 1.0)
        out[name] = np.ascontiguousarray(col)
    return out


def _compute(measurements: Mapping[str, np.ndarray]) -> Any:
    from models.properties.fuel import gas_fuel
    from models.units.gas_turbine.schema import GAS_TURBINE

    fuel = gas_fuel(dict(BENCH_FUEL))
    return GAS_TURBINE.compute(measurements, fuel, dict(BENCH_PARAMETERS))


def _worker(path_in: str, path_out: str, repeats: int, sample: int) -> int:
    """Child process: time the vectorised batch; save the sample's results."""
    data = np.load(path_in)
    m = {k: np.ascontiguousarray(data[k]) for k in FIELDS}
    n = m[FIELDS[0]].size
    warm = {k: v[: min(n, 1000)].copy() for k, v in m.items()}
    _compute(warm)
    times = []
    out = None
    for _ in range(max(1, repeats)):
        t0 = time.perf_counter()
        out = _compute(m)
        times.append(time.perf_counter() - t0)
    assert out is not None
    results = {k: np.asarray(out.values[k])[:sample] for k in _COMPARED}
    results["status"] = np.asarray(out.status)[:sample]
    bad = int(np.count_nonzero(~np.isfinite(np.asarray(out.values[next(iter(_COMPARED))]))))
    arrays: dict[str, Any] = dict(results)
    np.savez(path_out, **arrays)
    print(json.dumps({"times": times, "n": n, "nan_count": bad}))
    return 0


def _run_vectorised(
    m: Mapping[str, np.ndarray], repeats: int, sample: int, tmp: Path
) -> tuple[dict[str, Any], dict[str, np.ndarray]]:
    """Run :func:`_worker` in a child process on one CPU with single-threaded BLAS/OpenMP."""
    path_in, path_out = tmp / "snapshots.npz", tmp / "vectorised.npz"
    arrays: dict[str, Any] = dict(m)
    np.savez(path_in, **arrays)
    env = dict(os.environ)
    for var in _THREAD_VARS:
        env[var] = "1"
    root = str(Path(__file__).resolve().parents[1])
    env["PYTHONPATH"] = root + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    code = (
        "import os, sys\n"
        "if hasattr(os, 'sched_setaffinity'):\n"
        "    os.sched_setaffinity(0, {min(os.sched_getaffinity(0))})\n"
        "from daemon.bench import _worker\n"
        "sys.exit(_worker(sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4])))\n"
    )
    proc = subprocess.run(
        [sys.executable, "-c", code, str(path_in), str(path_out), str(repeats), str(sample)],
        env=env,
        capture_output=True,
        text=True,
        check=False,
    )
    if proc.returncode != 0:
        raise RuntimeError(f"vectorised run failed:\n{proc.stderr.strip()}")
    info = json.loads(proc.stdout.strip().splitlines()[-1])
    with np.load(path_out) as z:
        res = {k: z[k] for k in z.files}
    return info, res


def _run_loop(
    engine: ModuleType, m: Mapping[str, np.ndarray], sample: int, show_progress: bool
) -> tuple[float, dict[str, np.ndarray]]:
    """Reconstruct the first ``sample`` snapshots one by one with Cantera."""
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeRemainingColumn

    from models.properties.fuel import gas_fuel

    lhv = float(gas_fuel(dict(BENCH_FUEL)).lhv)
    out = {k: np.full(sample, np.nan) for k in _COMPARED}
    rows = [{k: float(m[k][i]) for k in FIELDS} for i in range(sample)]
    progress = Progress(
        "[progress.description]{task.description}",
        BarColumn(),
        MofNCompleteColumn(),
        TimeRemainingColumn(),
        disable=not show_progress,
        transient=True,
        console=Console(stderr=True),
    )
    elapsed = 0.0
    with progress:
        task = progress.add_task("Cantera per-snapshot loop", total=sample)
        for i, row in enumerate(rows):
            t0 = time.perf_counter()
            try:
                r = engine.reconstruct_one(row, BENCH_FUEL, lhv, BENCH_PARAMETERS)
            except (ValueError, RuntimeError):  # a snapshot Cantera cannot solve stays NaN
                r = {}
            elapsed += time.perf_counter() - t0
            for k in _COMPARED:
                out[k][i] = r.get(k, np.nan)
            progress.advance(task)
    return elapsed, out


# ------------------------------------------------------------------------------------------
# command
# ------------------------------------------------------------------------------------------
def run(args: argparse.Namespace) -> int:
    """Run the benchmark; see the module docstring for what is measured."""
    if args.snapshots < 1 or args.loop_sample < 1 or args.base_points < 1 or args.repeats < 1:
        print(
            "bench: --snapshots, --loop-sample, --base-points and --repeats must be >= 1",
            file=sys.stderr,
        )
        return EXIT_UNAVAILABLE
    engine = load_engine()
    if engine is None:
        print(
            "bench: needs the test dependency 'cantera' and the repository's "
            "tests/cantera_engine.py (run from a source checkout; install with "
            "`pip install -e '.[test]'`). Nothing was measured.",
            file=sys.stderr,
        )
        return EXIT_UNAVAILABLE
    sample = min(args.loop_sample, args.snapshots)
    rng = np.random.default_rng(args.seed)
    show = not args.json and sys.stderr.isatty()
    t0 = time.perf_counter()
    base = _base_points(engine, args.base_points, rng)
    t_forward = time.perf_counter() - t0
    m = make_snapshots(base, args.snapshots, rng)

    with tempfile.TemporaryDirectory(prefix="brayscope-bench-") as tmp:
        info, vec = _run_vectorised(m, args.repeats, sample, Path(tmp))
    t_vec = min(info["times"])
    rate_vec = args.snapshots / t_vec

    t_loop, loop = _run_loop(engine, m, sample, show)
    rate_loop = sample / t_loop
    ratio = rate_vec / rate_loop

    deviations: dict[str, float] = {}
    compared = np.ones(sample, dtype=bool)
    for k in _COMPARED:
        compared &= np.isfinite(vec[k]) & np.isfinite(loop[k])
    for k, (scale, _unit) in _COMPARED.items():
        d = np.abs(vec[k][compared] - loop[k][compared]) * scale
        deviations[k] = float(d.max()) if d.size else float("nan")
    dev_eff = max(
        deviations["compressor_isentropic_efficiency"], deviations["turbine_isentropic_efficiency"]
    )
    n_compared = int(compared.sum())

    checks = {
        "vectorised_rate": rate_vec >= TARGET_RATE,
        "ratio": ratio >= TARGET_RATIO,
        "deviation": bool(np.isfinite(dev_eff) and dev_eff <= TARGET_DEVIATION_POINTS)
        and n_compared == sample,
    }
    figures = {
        "snapshots": args.snapshots,
        "loop_sample": sample,
        "base_points": args.base_points,
        "seed": args.seed,
        "synthetic_data": "Cantera forward model on base points, resampled with sensor jitter",
        "vectorised_seconds_best": t_vec,
        "vectorised_seconds_all": info["times"],
        "vectorised_snapshots_per_second": rate_vec,
        "vectorised_nan_count": info["nan_count"],
        "loop_seconds": t_loop,
        "loop_snapshots_per_second": rate_loop,
        "ratio": ratio,
        "max_deviation_points": dev_eff,
        "max_deviation": deviations,
        "compared_snapshots": n_compared,
        "forward_model_seconds": t_forward,
        "targets": {
            "vectorised_snapshots_per_second": TARGET_RATE,
            "ratio": TARGET_RATIO,
            "max_deviation_points": TARGET_DEVIATION_POINTS,
        },
        "pass": checks,
        "machine": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "cpu_count": os.cpu_count(),
            "platform": platform.platform(),
            "processor": platform.processor() or platform.machine(),
        },
    }
    if args.json:
        print(json.dumps(figures, indent=2))
    else:
        _print_report(figures)
    return EXIT_OK if all(checks.values()) else EXIT_FAIL


def _print_report(f: Mapping[str, Any]) -> None:
    from rich.console import Console
    from rich.table import Table

    console = Console()
    ok = f["pass"]

    def verdict(b: bool) -> str:
        return "[bold green]PASS[/]" if b else "[bold red]FAIL[/]"

    table = Table(title="brayscope bench: gas-turbine reconstruction", show_lines=False)
    table.add_column("figure")
    table.add_column("measured", justify="right")
    table.add_column("target", justify="right")
    table.add_column("")
    table.add_row(
        f"vectorised, one core ({f['snapshots']:,} snapshots)",
        f"{f['vectorised_snapshots_per_second']:,.0f} /s",
        f">= {TARGET_RATE:,.0f} /s",
        verdict(ok["vectorised_rate"]),
    )
    table.add_row(
        f"Cantera per-snapshot loop ({f['loop_sample']:,} snapshots)",
        f"{f['loop_snapshots_per_second']:,.0f} /s",
        "",
        "",
    )
    table.add_row("ratio", f"{f['ratio']:,.0f} x", f">= {TARGET_RATIO:.0f} x", verdict(ok["ratio"]))
    table.add_row(
        "largest efficiency difference on the sample",
        f"{f['max_deviation_points']:.5f} points",
        f"<= {TARGET_DEVIATION_POINTS} points",
        verdict(ok["deviation"]),
    )
    console.print(table)
    d = f["max_deviation"]
    console.print(
        f"  compressor {d['compressor_isentropic_efficiency']:.5f} points, "
        f"turbine {d['turbine_isentropic_efficiency']:.5f} points, "
        f"turbine inlet {d['turbine_inlet_temperature']:.4f} K, "
        f"air flow {d['air_mass_flow']:.4f} kg/s "
        f"({f['compared_snapshots']:,} of {f['loop_sample']:,} compared)"
    )
    console.print(
        f"  synthetic data: {f['synthetic_data']} ({f['base_points']} points, seed {f['seed']}); "
        f"vectorised runs {', '.join(f'{t:.3f}' for t in f['vectorised_seconds_all'])} s"
    )
    console.print("  " + ("all targets met" if all(ok.values()) else "a target was missed"))
