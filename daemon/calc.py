"""``brayscope calc``: a one-shot, scriptable calculation from JSON on a file or stdin.

Reads one record, a JSON list of records or JSON Lines (the contract is in
:mod:`daemon.contract` and ``docs/calc.md``), validates every record, computes the valid ones in
vectorised batches (one model call per distinct fuel + parameters + corrections) and writes one
result per input record, in input order, as JSON, JSON Lines or a table.

Exit codes: 0 every record computed; 1 some record rejected or not computable; 2 usage error or
unreadable input.
"""

from __future__ import annotations

import argparse
import functools
import io
import json
import math
import os
import sys
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import IO, Any

import numpy as np

from daemon.cli import CAUTION
from daemon.contract import (
    DEFAULT_UNIT_TYPE,
    FieldError,
    InputFormatError,
    ParsedDocument,
    RecordRef,
    ValidRecord,
    correction_tables,
    echo_id,
    parse_document,
    validate_record,
)
from daemon.renames import add_renamed_option
from models.status import WARNING_REASONS, ModelInputError, reason_names
from models.units.base import FieldSpec, UnitType

__all__ = [
    "EXAMPLES",
    "EXIT_INVALID",
    "EXIT_OK",
    "EXIT_USAGE",
    "RecordResult",
    "add_parser",
    "calculate",
    "example_path",
    "render_json",
    "render_jsonl",
    "render_table",
    "run",
]

EXIT_OK = 0
EXIT_INVALID = 1
EXIT_USAGE = 2

#: Shipped example inputs (in ``daemon/examples``) and what each shows.
EXAMPLES: Mapping[str, str] = {
    "kr-gt1-snapshot.json": "one KR-GT1 snapshot on pipeline gas (the default --example)",
    "kestrel-ridge-batch.jsonl": "a day of KR-GT1/KR-GT2 snapshots as JSON Lines",
    "kr-gt3-liquid-fuel.json": "KR-GT3 on liquid fuel (distillate), with correction curves",
    "kestrel-ridge-errors.json": "a list with deliberate mistakes, to see the messages",
}
DEFAULT_EXAMPLE = "kr-gt1-snapshot.json"

EPILOG = f"""\
input (SI units, absolute pressures; details in docs/calc.md):
  {{"id": "...", "ts": "...",
   "measurements": {{"ambient_temperature": 288.15, "ambient_pressure": 101325, ...}},
   "fuel": {{"composition": {{"CH4": 0.93, "C2H6": 0.04, ...}}}}
        or {{"lower_heating_value": 42.8e6, "carbon_mass_fraction": 0.86,
            "hydrogen_mass_fraction": 0.135}},
   "parameters": {{"generator_efficiency": 0.985, ...}}}}       (optional, defaults apply)
  one object, a JSON list, or JSON Lines; NaN/Infinity and unknown keys are rejected.

output: one object per record, in input order: "status" {{"valid", "reasons", "warnings",
  "errors"}}, then every result by its glossary name (SI; heat rates in kJ/kWh).

exit codes:
  0  every record computed
  1  some record rejected or not computable (its errors/reasons are in the output and on stderr)
  2  usage error or unreadable input

caution: {CAUTION}

examples:
  brayscope calc --example                       print the shipped KR-GT1 example input
  brayscope calc --example | brayscope calc -    compute it (JSON to stdout)
  brayscope calc snapshots.jsonl -f table        a table: records as columns, °C/bar/MW/%
  brayscope calc batch.json -o results.json      write the results to a file
  brayscope calc --list-examples                 where the shipped examples are
  brayscope calc --fields                        every input and result field, unit, default"""


def example_path(name: str = DEFAULT_EXAMPLE) -> Any:
    """The shipped example ``name`` (package data) as an :mod:`importlib.resources` traversable.

    >>> example_path().name
    'kr-gt1-snapshot.json'
    """
    try:
        root: Any = resources.files("daemon")
    except NotADirectoryError:
        # Python 3.11 with a setuptools editable install: the package path also holds the
        # editable finder's hook, which importlib.resources' MultiplexedPath refuses.
        root = Path(__file__).resolve().parent
    return root.joinpath("examples", name)


# --------------------------------------------------------------------------------------------
# Parser
# --------------------------------------------------------------------------------------------


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    """Register ``calc`` on the ``brayscope`` sub-command parser."""
    p: argparse.ArgumentParser = subparsers.add_parser(
        "calc",
        help="compute gas-turbine performance from JSON snapshots (file or stdin)",
        description=(
            "One-shot calculation: read snapshot records (measurements, fuel, parameters) "
            "as JSON, a JSON list or JSON Lines, validate them, and print component "
            "efficiencies, heat rate, turbine inlet temperature and corrected values for each. "
            "A bad record is reported on stderr and in its output object; the others are "
            "still computed."
        ),
        epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument(
        "input",
        nargs="?",
        metavar="INPUT",
        help="input file (JSON object, JSON list or JSON Lines), or - for stdin",
    )
    p.add_argument(
        "-f",
        "--format",
        choices=("json", "jsonl", "table"),
        default=None,
        help="output format (default: JSON shaped like the input: an object, a list, or "
        "JSON Lines for JSON Lines input)",
    )
    p.add_argument("-o", "--output", metavar="FILE", help="write the output to FILE")
    p.add_argument(
        "--unit-type",
        default=DEFAULT_UNIT_TYPE,
        metavar="TYPE",
        help=f"unit type of records without a 'unit_type' key (default: {DEFAULT_UNIT_TYPE})",
    )
    add_renamed_option(p, "--unit", "--unit-type", "unit_type", metavar="TYPE")
    p.add_argument(
        "--example",
        action="store_true",
        help=f"print the shipped example input ({DEFAULT_EXAMPLE}) and exit",
    )
    p.add_argument(
        "--list-examples",
        action="store_true",
        help="list the shipped example inputs with their paths and exit",
    )
    p.add_argument(
        "--fields",
        action="store_true",
        help="list the unit type's measurements, parameters (with defaults) and results "
        "with units, and exit",
    )
    return p


# --------------------------------------------------------------------------------------------
# Computation
# --------------------------------------------------------------------------------------------


@functools.lru_cache(maxsize=1024)
def _split_reasons(code: int) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """(reason names, warning names) of a status code; few distinct codes occur in a batch."""
    warn = int(WARNING_REASONS)
    return tuple(reason_names(code & ~warn)), tuple(reason_names(code & warn))


@dataclass
class RecordResult:
    """The output of one input record (computed or rejected)."""

    ref: RecordRef
    unit: str | None
    id: str | int | None
    ts: str | float | None
    results: dict[str, float | None] = field(default_factory=dict)
    labels: dict[str, str] = field(default_factory=dict)
    status_code: int = 0
    errors: list[str] = field(default_factory=list)
    deprecations: list[str] = field(default_factory=list)

    @property
    def reasons(self) -> list[str]:
        """Names of the reason bits that left results uncomputed."""
        return list(_split_reasons(self.status_code)[0])

    @property
    def warnings(self) -> list[str]:
        """Names of the warning bits (computed, but worth a look)."""
        return list(_split_reasons(self.status_code)[1])

    @property
    def valid(self) -> bool:
        """True when the record was accepted and no non-warning reason is set."""
        return not self.errors and not self.reasons

    def to_json(self) -> dict[str, Any]:
        """The JSON object written for this record (NaN already ``None``)."""
        out: dict[str, Any] = {"record": self.ref.index}
        if self.ref.line is not None:
            out["line"] = self.ref.line
        out |= {"id": self.id, "ts": self.ts, "unit_type": self.unit}
        out["status"] = {
            "valid": self.valid,
            "reasons": self.reasons,
            "warnings": self.warnings,
            "errors": self.errors,
        }
        out |= self.results
        out |= self.labels
        return out


def _finite_or_none(v: float) -> float | None:
    return float(v) if math.isfinite(v) else None


def _group_key(rec: ValidRecord) -> str:
    corr = rec.corrections.model_dump() if rec.corrections is not None else None
    return json.dumps(
        [rec.unit_type.name, rec.fuel.model_dump(), dict(rec.parameters), corr],
        sort_keys=True,
    )


def _error_path(exc: ModelInputError) -> str:
    name = exc.name
    if name.startswith(("corrections.", "fuel.", "parameters.", "measurements.")):
        return name
    return f"fuel.{name}" if name else "fuel"


def _compute_group(group: Sequence[ValidRecord], outputs: dict[int, RecordResult]) -> None:
    first = group[0]
    unit_type = first.unit_type
    try:
        fuel = first.fuel.to_fuel()
    except ModelInputError as exc:
        for rec in group:
            outputs[rec.ref.index].errors.append(str(FieldError(_error_path(exc), str(exc))))
        return
    try:
        corrections = (
            correction_tables(first.corrections) if first.corrections is not None else None
        )
    except ModelInputError as exc:
        for rec in group:
            outputs[rec.ref.index].errors.append(str(FieldError(_error_path(exc), str(exc))))
        return
    measurements: dict[str, np.ndarray[Any, np.dtype[np.float64]]] = {}
    for spec in unit_type.measurements:
        arr = np.array(
            [np.nan if (v := rec.measurements.get(spec.name)) is None else v for rec in group],
            dtype=np.float64,
        )
        if spec.required or not np.all(np.isnan(arr)):
            measurements[spec.name] = arr
    parameters = {k: v for k, v in first.parameters.items() if v is not None}
    try:
        out = unit_type.compute(measurements, fuel, parameters, corrections)
    except ModelInputError as exc:
        path = exc.name if "." in exc.name else f"parameters.{exc.name}"
        for rec in group:
            outputs[rec.ref.index].errors.append(str(FieldError(path, str(exc))))
        return
    for i, rec in enumerate(group):
        res = outputs[rec.ref.index]
        res.results = {
            spec.name: _finite_or_none(float(out.values[spec.name][i]))
            if spec.name in out.values
            else None
            for spec in unit_type.results
        }
        res.status_code = int(out.status[i])
        res.labels = dict(out.labels)
        res.labels |= {k: str(v[i]) for k, v in out.label_arrays.items()}


def calculate(
    document: ParsedDocument,
    unit_types: Mapping[str, UnitType],
    default_unit: str = DEFAULT_UNIT_TYPE,
) -> list[RecordResult]:
    """Validate and compute every record of ``document``; results in input order.

    Valid records are grouped by unit type, fuel, parameters and corrections, and each group is
    computed with one vectorised call of the unit type's ``compute``.
    """
    outputs: dict[int, RecordResult] = {}
    groups: dict[str, list[ValidRecord]] = {}
    for raw in document.records:
        rid, ts = echo_id(raw.value)
        ref = RecordRef(raw.ref.index, raw.ref.line, rid)
        unit = raw.value.get("unit_type", default_unit) if isinstance(raw.value, dict) else None
        result = RecordResult(ref, unit if isinstance(unit, str) else None, rid, ts)
        # every output object carries every result key (null until computed), so scripts can
        # rely on the keys even for rejected records
        known = unit_types.get(unit) if isinstance(unit, str) else None
        result.results = {s.name: None for s in (known or unit_types[default_unit]).results}
        outputs[ref.index] = result
        if raw.error is not None:
            result.errors.append(str(raw.error))
            continue
        checked = validate_record(ref, raw.value, unit_types, default_unit)
        if isinstance(checked, list):
            result.errors.extend(str(e) for e in checked)
            continue
        result.deprecations.extend(checked.deprecations)
        groups.setdefault(_group_key(checked), []).append(checked)
    for group in groups.values():
        _compute_group(group, outputs)
    return [outputs[r.ref.index] for r in document.records]


# --------------------------------------------------------------------------------------------
# Output
# --------------------------------------------------------------------------------------------


def render_json(results: Sequence[RecordResult], *, as_list: bool) -> str:
    """JSON text: one object, or a list (``as_list``)."""
    objs = [r.to_json() for r in results]
    doc: Any = objs if as_list or len(objs) != 1 else objs[0]
    return json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False) + "\n"


def render_jsonl(results: Sequence[RecordResult]) -> str:
    """JSON Lines text: one compact object per line."""
    return "".join(
        json.dumps(r.to_json(), ensure_ascii=False, allow_nan=False) + "\n" for r in results
    )


#: Engineering display unit for an SI unit (pint spelling, shown symbol, decimals).
_ENGINEERING: Mapping[str, tuple[str, str, int]] = {
    "K": ("degC", "°C", 1),
    "Pa": ("bar", "bar", 3),
    "W": ("MW", "MW", 2),
    "J/kg": ("kJ/kg", "kJ/kg", 1),
    "kg/s": ("kg/s", "kg/s", 2),
    "kJ/kWh": ("kJ/kWh", "kJ/kWh", 0),
}
_PERCENT_WORDS = ("efficiency", "fraction", "humidity", "loss", "degradation", "deviation")


def _display(spec: FieldSpec, values: Sequence[float | None]) -> tuple[str, list[str]]:
    """Unit symbol and formatted cells of one row, in engineering units (via pint)."""
    arr = np.array([np.nan if v is None else v for v in values], dtype=np.float64)
    target = _ENGINEERING.get(spec.unit)
    if spec.unit == "1" and any(w in spec.name for w in _PERCENT_WORDS):
        target = ("percent", "%", 2)
    symbol, decimals = spec.unit, 4
    if target is not None:
        try:
            import pint

            ureg = _ureg()
            q = ureg.Quantity(arr, "dimensionless" if spec.unit == "1" else spec.unit)
            arr = np.asarray(q.to(target[0]).magnitude, dtype=np.float64)
            symbol, decimals = target[1], target[2]
        except (pint.errors.PintError, ValueError):
            pass
    cells = ["—" if not math.isfinite(v) else f"{v:,.{decimals}f}" for v in arr]
    return ("" if symbol == "1" else symbol), cells


_UREG: list[Any] = []


def _ureg() -> Any:
    if not _UREG:
        import pint

        _UREG.append(pint.UnitRegistry())
    return _UREG[0]


def render_table(
    results: Sequence[RecordResult],
    unit_types: Mapping[str, UnitType],
    stream: IO[str],
    *,
    terminal: bool,
) -> None:
    """A table with records as columns and quantities as rows, in engineering units.

    Plain text (no colour, ASCII-safe box) unless ``terminal``.
    """
    from rich import box
    from rich.console import Console
    from rich.table import Table

    title_cols = [str(r.id) if r.id is not None else f"record {r.ref.index}" for r in results]
    # Plain text is never wrapped or cut: a file or a pipe gets every digit and every message.
    width = None if terminal else 100_000
    buffer = io.StringIO()
    console = Console(
        file=stream if terminal else buffer,
        force_terminal=terminal,
        no_color=not terminal,
        width=width,
        highlight=False,
    )
    table = Table(
        title="brayscope calc (advisory)",
        box=box.SIMPLE_HEAD if terminal else box.ASCII2,
        show_lines=False,
        title_justify="left",
    )
    table.add_column("quantity", no_wrap=True)
    table.add_column("unit", no_wrap=True)
    for t in title_cols:
        table.add_column(t, justify="right", max_width=24)
    if any(r.ts is not None for r in results):
        table.add_row("ts", "", *["" if r.ts is None else str(r.ts) for r in results])
    table.add_row(
        "status",
        "",
        *[("valid" if r.valid else "REJECTED" if r.errors else "invalid") for r in results],
    )
    seen: set[str] = set()
    for r in results:
        ut = unit_types.get(r.unit or "")
        if ut is None or ut.name in seen:
            continue
        seen.add(ut.name)
        for spec in ut.results:
            values = [x.results.get(spec.name) if x.unit == ut.name else None for x in results]
            symbol, cells = _display(spec, values)
            table.add_row(spec.name, symbol, *cells)
    label_names = sorted({k for r in results for k in r.labels})
    for name in label_names:
        table.add_row(name, "", *[r.labels.get(name, "") for r in results])
    console.print(table)
    for r, t in zip(results, title_cols, strict=True):
        for reason in r.reasons:
            console.print(f"{t}: reason: {reason}")
        for warning in r.warnings:
            console.print(f"{t}: warning: {warning}")
        for err in r.errors:
            console.print(f"{t}: error: {err}")
    console.print(CAUTION)
    if not terminal:
        stream.write("".join(line.rstrip() + "\n" for line in buffer.getvalue().splitlines()))


def _print_fields(unit_type: UnitType, stream: IO[str]) -> None:
    def rows(title: str, specs: Sequence[FieldSpec], with_default: bool) -> None:
        stream.write(f"{title}:\n")
        for s in specs:
            need = "required" if s.required else "optional"
            extra = f", default {s.default:g}" if with_default and s.default is not None else ""
            rng = ""
            if math.isfinite(s.low) or math.isfinite(s.high):
                rng = f", range {s.low:g}..{s.high:g}"
            stream.write(f"  {s.name} [{s.unit}] ({need}{extra}{rng}): {s.description}\n")

    stream.write(f"unit type {unit_type.name}: {unit_type.description}\n")
    stream.write(
        "stations (brayscope numbering; SAE AS755 number in brackets): 0 ambient [0], "
        "1 compressor inlet [2], 2 compressor discharge [3], 3 turbine inlet [4], "
        "4 turbine exhaust [5]\n"
    )
    rows("measurements", unit_type.measurements, False)
    rows("parameters", unit_type.parameters, True)
    stream.write("results:\n")
    for s in unit_type.results:
        stream.write(f"  {s.name} [{s.unit}]: {s.description}\n")


# --------------------------------------------------------------------------------------------
# Entry point
# --------------------------------------------------------------------------------------------


def _usage(message: str) -> int:
    sys.stderr.write(f"brayscope calc: error: {message}\n")
    return EXIT_USAGE


def _read_input(name: str) -> str:
    if name == "-":
        return sys.stdin.read()
    with open(name, encoding="utf-8") as fh:
        return fh.read()


def run(args: argparse.Namespace, unit_types: Mapping[str, UnitType] | None = None) -> int:
    """Run ``brayscope calc``; returns the exit code (0, 1 or 2, see the module docstring).

    ``unit_types`` (name -> unit type) defaults to :func:`models.units.registry.builtin_unit_types`.
    A reader that closes the pipe early (``| head``) ends the command quietly with code 1.
    """
    try:
        return _run(args, unit_types)
    except BrokenPipeError:
        # Python docs, signal module, "Note on SIGPIPE": point stdout at devnull so the
        # interpreter's final flush does not raise again.
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return EXIT_INVALID


def _run(args: argparse.Namespace, unit_types: Mapping[str, UnitType] | None) -> int:
    if unit_types is None:
        from models.units.registry import builtin_unit_types

        unit_types = builtin_unit_types()
    if args.example:
        sys.stdout.write(example_path().read_text(encoding="utf-8"))
        if sys.stdout.isatty():
            sys.stderr.write(
                f"(shipped at {example_path()}; compute it with "
                "'brayscope calc --example | brayscope calc -')\n"
            )
        return EXIT_OK
    if args.list_examples:
        for name, what in EXAMPLES.items():
            sys.stdout.write(f"{example_path(name)}\n    {what}\n")
        return EXIT_OK
    if args.unit_type not in unit_types:
        return _usage(f"unknown unit type {args.unit_type!r}; known: {', '.join(unit_types)}")
    if args.fields:
        _print_fields(unit_types[args.unit_type], sys.stdout)
        return EXIT_OK
    if args.input is None:
        return _usage(
            "INPUT is required (a file, or - for stdin); try 'brayscope calc --example | "
            "brayscope calc -'"
        )
    try:
        text = _read_input(args.input)
    except (OSError, UnicodeDecodeError) as exc:
        return _usage(f"cannot read {args.input}: {exc}")
    try:
        document = parse_document(text)
    except InputFormatError as exc:
        return _usage(f"{args.input}: {exc}")

    results = calculate(document, unit_types, args.unit_type)

    for r in results:
        for note in r.deprecations:
            sys.stderr.write(f"{r.ref}: {note}\n")
        for err in r.errors:
            sys.stderr.write(f"{r.ref}: {err}\n")
        if not r.errors and r.reasons:
            sys.stderr.write(f"{r.ref}: not fully computable: {', '.join(r.reasons)}\n")

    fmt = args.format or ("jsonl" if document.shape == "jsonl" else "json")
    try:
        stream: IO[str] = (
            open(args.output, "w", encoding="utf-8")  # noqa: SIM115 - closed below
            if args.output
            else sys.stdout
        )
    except OSError as exc:
        return _usage(f"cannot write {args.output}: {exc}")
    try:
        if fmt == "table":
            terminal = stream is sys.stdout and sys.stdout.isatty()
            render_table(results, unit_types, stream, terminal=terminal)
        elif fmt == "jsonl":
            stream.write(render_jsonl(results))
        else:
            stream.write(render_json(results, as_list=document.shape != "object"))
    finally:
        if stream is not sys.stdout:
            stream.close()
    return EXIT_OK if all(r.valid for r in results) else EXIT_INVALID
