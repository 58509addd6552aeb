"""Docstrings of models/: collected examples, equations and references, one unit notation.

Mechanical checks of what the style guide asks of the documented library (``help()`` of a
public function stands alone): its docstring examples run under pytest, each public function
states its equation in a ``.. math::`` block and cites its source, dimensionless quantities
are written ``[-]``, the units in the parameter docs are units (pint parses them) and, where a
unit type declares a quantity (``FieldSpec.unit``), the docs of its compute functions give the
same unit.
"""

from __future__ import annotations

import importlib
import inspect
import io
import pkgutil
import re
import tokenize
from collections.abc import Callable, Iterator
from pathlib import Path
from types import ModuleType

import pint
import pytest

import models
from models.units.gas_turbine.reconstruct import reconstruct
from models.units.gas_turbine.schema import GAS_TURBINE
from models.units.gas_turbine.simulate import simulate

ROOT = Path(__file__).resolve().parents[1]

#: Public functions without an equation of their own (lookups, validation, bookkeeping): the
#: reason is given for each.
NO_EQUATION = {
    "models.status.combine": "bit arithmetic on status arrays",
    "models.status.flag": "bit arithmetic on status arrays",
    "models.status.reason_names": "names of status bits",
    "models.units.registry.builtin_unit_types": "a registry",
    "models.properties.mixtures.check_composition": "input validation",
    "models.units.gas_turbine.checks.check_inputs": "input validation",
    "models.units.gas_turbine.checks.fuel_temperature_used": "substitution of a default",
    "models.units.gas_turbine.fluids.reference_ambient": "constants of a standard",
    "models.components.reciprocating.dry_air": "a composition of a standard",
    **{
        f"models.properties.iso6976_data.{n}": "a table lookup of ISO 6976"
        for n in (
            "atoms",
            "combustion_column",
            "enthalpy_of_vaporization",
            "gross_molar",
            "metering_column",
            "molar_mass",
            "summation_factor",
            "z_air",
        )
    },
}
#: Public functions with nothing to cite (no method, no data of a source).
NO_REFERENCE = {
    "models.status.combine",
    "models.status.flag",
    "models.status.reason_names",
    "models.units.registry.builtin_unit_types",
    "models.properties.mixtures.check_composition",
    "models.units.gas_turbine.checks.check_inputs",
    "models.units.gas_turbine.checks.fuel_temperature_used",
}
#: Units in the docs that are descriptions rather than SI units.
DESCRIPTIVE_UNITS = {
    "KPI unit",
    "KPI unit / 1000 h",
    "KPI unit per 1000 fired h",
    "any unit",
    "any unit, consistent over time",
    "its unit",
    "its own unit",
    "unit of x",
    "unit of x, squared",
    "unit of t",
    "fired h",
    "fired h or s",
}


def _modules() -> Iterator[ModuleType]:
    for info in pkgutil.walk_packages(models.__path__, "models."):
        yield importlib.import_module(info.name)


def _public_functions() -> Iterator[tuple[str, Callable[..., object]]]:
    for mod in _modules():
        for name in getattr(mod, "__all__", ()):
            obj = getattr(mod, name)
            if inspect.isfunction(obj) and obj.__module__ == mod.__name__:
                yield f"{mod.__name__}.{name}", obj


def _sections(doc: str, names: tuple[str, ...]) -> Iterator[str]:
    """The bodies of the numpydoc sections ``names`` of a docstring."""
    parts = re.split(r"\n(\w[\w ]*)\n-{3,}\n", "\n" + doc)
    for title, body in zip(parts[1::2], parts[2::2], strict=True):
        if title in names:
            yield body


def _parameter_units(doc: str) -> dict[str, str | None]:
    """Parameter name -> its unit in a numpydoc docstring (None: no unit given).

    A group of names (``a, b : array_like``) lists its units in order (``T1 [K], p1 [Pa]``);
    one unit applies to the whole group.
    """
    out: dict[str, str | None] = {}
    for body in _sections(doc, ("Parameters",)):
        groups: list[tuple[list[str], list[str]]] = []
        header: list[str] = []
        for line in body.splitlines():
            if line and not line.startswith(" "):
                header.append(line)
                if " : " in line or line.endswith(":"):
                    text = " ".join(header).split(" : ")[0]
                    groups.append(([n.strip() for n in text.split(",") if n.strip()], []))
                    header = []
            elif line.strip() and groups:
                groups[-1][1].extend(re.findall(r"\[([^\]]+)\]", line))
        for names, units in groups:
            for i, n in enumerate(names):
                if len(units) == len(names):
                    out[n] = units[i]
                elif len(units) == 1:
                    out[n] = units[0]
                else:
                    out[n] = None
    return out


def test_models_docstring_examples_are_collected_by_pytest(pytestconfig) -> None:
    # pyproject: testpaths include models and --doctest-modules is on, so `make test` runs
    # every example of models/ (and fails on a wrong one)
    assert "models" in pytestconfig.getini("testpaths")
    assert pytestconfig.option.doctestmodules


def test_public_functions_state_their_equation_and_source() -> None:
    missing_math, missing_refs = [], []
    names = set()
    for name, fn in _public_functions():
        names.add(name)
        doc = inspect.getdoc(fn) or ""
        if name not in NO_EQUATION and ".. math::" not in doc:
            missing_math.append(name)
        if name not in NO_REFERENCE and "References\n----------" not in doc:
            missing_refs.append(name)
    assert missing_math == [], "public functions without a .. math:: block"
    assert missing_refs == [], "public functions without References"
    assert set(NO_EQUATION) <= names and names >= NO_REFERENCE  # no stale exemptions


def test_dimensionless_is_written_as_a_dash() -> None:
    # "[1]" as a unit (not a reference label ".. [1]" or a citation "[1]_")
    unit_one = re.compile(r"(?<=[ (])\[1\](?!_)")
    found = []
    for path in sorted((ROOT / "models").rglob("*.py")):
        src = path.read_text(encoding="utf-8")
        for tok in tokenize.generate_tokens(io.StringIO(src).readline):
            if tok.type in (tokenize.STRING, tokenize.COMMENT):
                found.extend(
                    f"{path.relative_to(ROOT)}:{tok.start[0]}: {line.strip()}"
                    for line in tok.string.splitlines()
                    if unit_one.search(line) and not line.lstrip().startswith(".. [")
                )
    assert found == []


def test_units_in_parameter_docs_are_units() -> None:
    ureg = pint.UnitRegistry()
    bad = []
    for mod in _modules():
        for obj in vars(mod).values():
            if getattr(obj, "__module__", None) != mod.__name__:
                continue
            if not (inspect.isfunction(obj) or inspect.isclass(obj)):
                continue
            for body in _sections(inspect.getdoc(obj) or "", ("Parameters", "Returns")):
                for raw in re.findall(r"(?<![\w.])\[([^\]\[]+)\](?!_)", body):
                    unit = " ".join(raw.split())
                    if unit == "-" or unit in DESCRIPTIVE_UNITS:
                        continue
                    # "J/kg gas", "kg air / kg fuel": the qualifier names the substance
                    text = re.sub(r"\b(gas|air|dry|fuel|_fuel)\b", "", unit).replace("kg_", "kg")
                    text = text.replace("m3", "m**3").replace("^", "**").replace("°C", "degC")
                    try:
                        ureg.parse_expression(text.strip() or "1")
                    except Exception:
                        bad.append(f"{mod.__name__}.{obj.__name__}: [{unit}]")
    assert bad == []


@pytest.mark.parametrize("fn", [reconstruct, simulate], ids=["reconstruct", "simulate"])
def test_gas_turbine_docs_give_the_declared_units(fn) -> None:
    # each measurement and parameter the unit type declares (FieldSpec.unit, SI, "1" for
    # dimensionless) has the same unit in the parameter docs of the compute functions
    documented = _parameter_units(inspect.getdoc(fn) or "")
    declared = {f.name: f.unit for f in (*GAS_TURBINE.measurements, *GAS_TURBINE.parameters)}
    compared = 0
    for name, unit in declared.items():
        if name not in documented:
            continue
        own = documented[name]
        expected = "-" if unit == "1" else unit
        assert own == expected, f"{fn.__name__}({name}): docs [{own}], declared [{expected}]"
        compared += 1
    assert compared >= (10 if fn is reconstruct else 5)


def test_long_modules_say_why_at_their_top() -> None:
    # the project's rule: no module above about 600 lines without a written reason at its top
    # (a "Length (...)" paragraph in the module docstring)
    unexplained = []
    for path in sorted((ROOT / "models").rglob("*.py")):
        if path.name == "thermo_data.py":  # generated tables (tools/gen_thermo_data.py)
            continue
        text = path.read_text(encoding="utf-8")
        head = text.split('"""')[1] if '"""' in text else ""
        if text.count("\n") > 620 and "Length (" not in head:
            unexplained.append(path.relative_to(ROOT).as_posix())
    assert unexplained == []
