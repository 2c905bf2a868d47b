"""Tests about the documentation: every public function of the library
documents every parameter in a numpydoc ``Parameters`` section, and every
numeric parameter and return value states its unit in ``[brackets]``
(``[1]`` for dimensionless); a parameter that is not a physical quantity
(a design, a result object, a flag) may be documented by its type alone.
The same kind of check as python-control's
``control/tests/docstrings_test.py``; docstrings parsed with numpydoc's own
parser (``numpydoc.docscrape``).

Only names listed in a module's ``__all__`` are public; private names and
the command-line layer (typer options document themselves in ``--help``)
are skipped.
"""

from __future__ import annotations

import importlib
import inspect
import pkgutil
import re

import pytest
from numpydoc.docscrape import FunctionDoc

import rcc

#: Type words that mark a physical (numeric) parameter, which needs a unit.
#: Plain ``int`` (counts, indices) and arrays of bool are not quantities.
NUMERIC_TYPE = re.compile(r"\b(float|array_like|array-like|ndarray|number|scalar)\b")
NOT_A_QUANTITY = re.compile(r"\bof (bool|int|str)\b")
UNIT = re.compile(r"\[[^\[\]]+\]")


def is_quantity(type_text: str) -> bool:
    return bool(NUMERIC_TYPE.search(type_text)) and not NOT_A_QUANTITY.search(type_text)


def library_modules():
    modules = []
    for info in pkgutil.walk_packages(rcc.__path__, prefix="rcc."):
        if info.name == "rcc.cli" or info.name.startswith("rcc.cli."):
            continue
        module = importlib.import_module(info.name)
        if hasattr(module, "__all__"):
            modules.append(module)
    return modules


#: Public functions whose docstrings miss a parameter or a unit today
#: (listed for the module owners; strict xfail, so fixing one makes its
#: entry fail here until it is removed from this list).
KNOWN_GAPS = {
    "rcc.engine.simulate.simulate_reference": "'x0' (state vector) without units",
    "rcc.engine.simulate.expm_flushed": "'matrix' without units",
}

#: Same for the Returns section.
KNOWN_RETURN_GAPS = {
    "rcc.engine.simulate.expm_flushed": "returned matrix without units",
}


def public_functions():
    found = []
    for module in library_modules():
        for name in module.__all__:
            if name.startswith("_"):
                continue
            obj = getattr(module, name, None)
            if inspect.isfunction(obj) and obj.__module__ == module.__name__:
                found.append(pytest.param(obj, id=f"{module.__name__}.{name}"))
    return found


FUNCTIONS = public_functions()


def with_known_gaps(params, gaps):
    marked = []
    for param in params:
        reason = gaps.get(param.id)
        marks = [pytest.mark.xfail(strict=True, reason=reason)] if reason else []
        marked.append(pytest.param(*param.values, id=param.id, marks=marks))
    return marked


def test_the_walk_finds_the_models():
    names = {param.id for param in FUNCTIONS}
    for expected in ("rcc.mains.rectified_peak", "rcc.units.parse_quantity",
                     "rcc.design.load_design", "rcc.devices.current_gain"):
        assert expected in names
    assert len(names) > 20


def documented_parameters(doc):
    return {name.strip().lstrip("*"): (kind, " ".join(desc).strip())
            for name, kind, desc in doc["Parameters"]
            for name in name.split(",")}


def parameter_problems(function) -> list[str]:
    doc = FunctionDoc(function)
    signature = inspect.signature(function)
    documented = documented_parameters(doc)
    problems = []
    for name in signature.parameters:
        if name in ("self", "cls"):
            continue
        if name not in documented:
            problems.append(f"parameter {name!r} not in the Parameters section")
            continue
        kind, description = documented[name]
        if not description and not kind:
            problems.append(f"parameter {name!r} has neither type nor description")
        elif is_quantity(kind) and not UNIT.search(description):
            problems.append(f"parameter {name!r} ({kind}) has no unit in [brackets]")
    extra = set(documented) - set(signature.parameters)
    problems += [f"documented parameter {name!r} is not in the signature" for name in extra]
    return problems


def return_problems(function) -> list[str]:
    doc = FunctionDoc(function)
    problems = []
    for name, kind, desc in doc["Returns"]:
        text = " ".join(desc)
        type_text = kind or name  # numpydoc puts an unnamed type in `name`
        if is_quantity(type_text) and not UNIT.search(text):
            problems.append(f"return {type_text!r} has no unit in [brackets]")
    return problems


@pytest.mark.parametrize("function", with_known_gaps(FUNCTIONS, KNOWN_GAPS))
def test_every_parameter_documented_with_unit(function):
    problems = parameter_problems(function)
    assert not problems, "\n".join(problems)


@pytest.mark.parametrize("function", with_known_gaps(FUNCTIONS, KNOWN_RETURN_GAPS))
def test_numeric_returns_have_units(function):
    problems = return_problems(function)
    assert not problems, "\n".join(problems)


# ------------------------------------------------- the checker itself
def _good(bus_voltage, design, count=3):
    """Example.

    Parameters
    ----------
    bus_voltage : float or array_like
        Bus voltage [V].
    design : rcc.design.Design
        The design.
    count : int
        Number of points.

    Returns
    -------
    ndarray
        Current [A].
    """


def _bad(bus_voltage, design, extra):
    """Example.

    Parameters
    ----------
    bus_voltage : float or array_like
        Bus voltage in volts.
    design : rcc.design.Design
    other : float
        Not in the signature [1].

    Returns
    -------
    ndarray
        Current in amperes.
    """


def test_checker_accepts_a_good_docstring():
    assert parameter_problems(_good) == []
    assert return_problems(_good) == []


def test_checker_finds_every_kind_of_gap():
    problems = parameter_problems(_bad)
    assert any("'bus_voltage'" in p and "no unit" in p for p in problems)
    assert any("'extra' not in the Parameters section" in p for p in problems)
    assert not any("'design'" in p for p in problems)  # a type alone documents an object
    assert any("'extra' not in the Parameters section" in p for p in problems)
    assert any("'other' is not in the signature" in p for p in problems)
    assert return_problems(_bad) == ["return 'ndarray' has no unit in [brackets]"]
