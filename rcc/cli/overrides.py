"""Value overrides given as text: ``section.key=VALUE`` (``--set`` on the command line,
``--set-each`` variants of ``rcc compare``).

The value is read as a TOML value when it is one (``10``, ``0.98``, ``"1 Mohm"``,
``{tolerance = "5%"}``) and taken as a plain string otherwise (``1 Mohm``,
``zener``), so a value means the same here as in the design file and is validated
by the same code (:func:`rcc.design.load_design`).
"""

from __future__ import annotations

import tomllib
from dataclasses import replace
from typing import Any, Iterable, List, Optional

import typer

__all__ = ["SET_HELP", "set_option", "load_with_overrides", "parse_setting",
           "parse_settings", "split_variant", "describe_overrides"]

SET_HELP = ("Override a design value, as in the file: section.key=VALUE, e.g. "
            "--set switch.hfe_min=10 --set startup.resistance='1 Mohm'. Repeatable.")


def set_option():
    """The ``--set`` option every command that takes a design shares."""
    return typer.Option(None, "--set", metavar="SECTION.KEY=VALUE", help=SET_HELP)


def load_with_overrides(path, settings: Optional[List[str]]):
    """Load a design file with ``--set`` overrides; exit 2 on any problem.

    The design's title gains ``[--set ...]`` naming every overridden value, so
    each report says what it describes.
    """
    from rcc.cli import fail_input
    from rcc.design import DesignError, load_design

    try:
        overrides = parse_settings(settings)
    except ValueError as error:
        raise fail_input(str(error)) from None
    try:
        design = load_design(path, overrides=overrides)
    except DesignError as error:
        raise fail_input(error.problems) from None
    if overrides:
        design = replace(design, title=f"{design.title} [--set {describe_overrides(overrides)}]")
    return design


def parse_setting(text: str) -> tuple[str, Any]:
    """Read one ``section.key=VALUE``.

    Parameters
    ----------
    text : str
        The setting, e.g. ``"switch.hfe_min=10"`` or ``"startup.resistance=1 Mohm"`` [-].

    Returns
    -------
    tuple of (str, object)
        The dotted key and its value (a TOML value or the plain string) [-].

    Raises
    ------
    ValueError
        Without ``=`` or without a key; the message starts with the setting.
    """
    key, equals, value = text.partition("=")
    key, value = key.strip(), value.strip()
    if not equals or not key or not value:
        raise ValueError(f"--set {text!r}: expected section.key=VALUE, e.g. "
                         "switch.hfe_min=10 or startup.resistance='1 Mohm'")
    try:
        parsed = tomllib.loads(f"value = {value}")["value"]
    except tomllib.TOMLDecodeError:
        parsed = value
    return key, parsed


def parse_settings(texts: Iterable[str] | None) -> dict[str, Any]:
    """Read several settings; a later one replaces an earlier one of the same key.

    Parameters
    ----------
    texts : iterable of str or None
        Settings ``section.key=VALUE`` [-].

    Returns
    -------
    dict
        ``{"section.key": value}`` in the order given [-].
    """
    result: dict[str, Any] = {}
    for text in texts or ():
        key, value = parse_setting(text)
        result[key] = value
    return result


def split_variant(text: str) -> list[str]:
    """Split ``"a.b=1, c.d='2 V'"`` at the commas outside quotes and braces.

    Parameters
    ----------
    text : str
        Comma-separated settings [-].

    Returns
    -------
    list of str
        The settings, stripped, empty ones dropped [-].
    """
    parts, depth, quote, current = [], 0, "", []
    for char in text:
        if quote:
            quote = "" if char == quote else quote
        elif char in "\"'":
            quote = char
        elif char in "{[":
            depth += 1
        elif char in "}]":
            depth -= 1
        elif char == "," and depth == 0:
            parts.append("".join(current))
            current = []
            continue
        current.append(char)
    parts.append("".join(current))
    return [part.strip() for part in parts if part.strip()]


def describe_overrides(overrides: dict[str, Any]) -> str:
    """``"switch.hfe_min=10, startup.resistance=1 Mohm"`` for titles [-]."""
    return ", ".join(f"{key}={value}" for key, value in overrides.items())
