"""The one list of tocsin's spreadsheet functions: names, arguments and their one-line help.

Every face is built from this list: the xlwings face (:mod:`sheetfns.udf.excel`) takes each function's
wizard text and argument help from it, and the LibreOffice Calc add-in (:mod:`sheetfns.udf.calc`) takes
its interface (the IDL of its type library), its function descriptions and its calls from it. A
function enters the list by one decorator on its plain definition in :mod:`sheetfns.udf.functions`::

    @sheet_function(values=cells("The data column: ..."), criterion=value("The event rule ..."),
                    min_run=value("Optional: the rule must hold ..."))
    def EVENT_FLAG(values, criterion, min_run=1):
        \"\"\"Turn a column into events: ... Example: =EVENT_FLAG(B2:B2930, ">=1150").\"\"\"

The decorator checks that the help names exactly the function's arguments, in order, that an optional
argument (one with a default) says so ("Optional: ..."), and wraps the function so that it never
raises (an error becomes its ``#tocsin: ...`` text, :func:`sheetfns.udf.coerce.guarded`).
"""
from __future__ import annotations

import inspect
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from sheetfns.udf.coerce import guarded

CATEGORY = "tocsin"
HELP_LIMIT = 255          # Excel's function wizard shows at most 255 characters of a description


@dataclass(frozen=True)
class Arg:
    """One argument: its name, one line of help, whether it takes a range of cells, its default.

    ``zero_is_blank`` (optional arguments only): LibreOffice Calc hands a blank cell given as a single
    value over as 0, which cannot be told from a typed 0. Where 0 is not an allowed value of the
    argument (a horizon, a window, a season...) the Calc face reads 0 as "omitted"; where 0 means
    something (no lags, no harmonics) it stays 0.
    """

    name: str
    help: str
    is_range: bool
    optional: bool = False
    default: Any = None
    zero_is_blank: bool = True


@dataclass(frozen=True)
class SheetFunction:
    """One spreadsheet function: the plain (never raising) callable and what the wizards show."""

    name: str
    help: str
    args: tuple[Arg, ...]
    fn: Callable[..., Any]
    call_in_wizard: bool = True

    def arg(self, name: str) -> Arg:
        return next(a for a in self.args if a.name == name)


@dataclass(frozen=True)
class _ArgHelp:
    help: str
    is_range: bool
    zero_is_blank: bool


def cells(help: str) -> _ArgHelp:
    """The help of an argument that takes a range of cells (a column, a block)."""
    return _ArgHelp(help, True, True)


def value(help: str, *, zero_is_blank: bool = True) -> _ArgHelp:
    """The help of an argument that takes a single value (a cell or a literal)."""
    return _ArgHelp(help, False, zero_is_blank)


FUNCTIONS: dict[str, SheetFunction] = {}
"""Every spreadsheet function by name, in the order they are defined (the order the faces list them)."""


def one_line(text: str | None) -> str:
    """A docstring as one line of wizard text."""
    return " ".join(inspect.cleandoc(text or "").split())


def sheet_function(*, call_in_wizard: bool = True, **arg_help: _ArgHelp
                   ) -> Callable[[Callable[..., Any]], Callable[..., Any]]:
    """Enter the decorated plain function in :data:`FUNCTIONS`; return it wrapped by ``guarded``."""

    def enter(fn: Callable[..., Any]) -> Callable[..., Any]:
        name = fn.__name__
        params = list(inspect.signature(fn).parameters.values())
        if [p.name for p in params] != list(arg_help):
            raise TypeError(f"{name}: the help names {list(arg_help)}, the function takes "
                            f"{[p.name for p in params]}")
        args = []
        for p in params:
            h = arg_help[p.name]
            optional = p.default is not inspect.Parameter.empty
            if optional != h.help.startswith("Optional"):
                raise TypeError(f"{name}({p.name}): an argument's help starts with 'Optional' exactly "
                                "when the argument has a default")
            args.append(Arg(p.name, h.help, h.is_range, optional, p.default if optional else None,
                            h.zero_is_blank and optional))
        text = one_line(fn.__doc__)
        too_long = [t for t in (text, *(a.help for a in args)) if len(t) > HELP_LIMIT]
        if too_long:
            raise TypeError(f"{name}: help longer than {HELP_LIMIT} characters: {too_long[0][:60]}...")
        plain = guarded(fn)
        FUNCTIONS[name] = SheetFunction(name, text, tuple(args), plain, call_in_wizard)
        return plain

    return enter
