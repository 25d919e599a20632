"""One error hierarchy for everything a sheet can get wrong.

Every error knows where it happened (a :class:`Span` in a :class:`Source`),
says what is wrong in one line, and may carry a hint. :meth:`SheetError.render`
produces the text the command line prints::

    demo.sheet:12:7: unknown unit `kmz`
      v = 3 kmz / s
            ^~~
      hint: did you mean `km`, `mm`?
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from pathlib import Path
from typing import NamedTuple


class Span(NamedTuple):
    """A region of source text; lines and columns count from 1, ``end_column`` is exclusive.

    A named tuple rather than a dataclass: the parser makes one for every token.
    """

    line: int
    column: int
    end_line: int
    end_column: int

    def to(self, other: Span) -> Span:
        """The span from the start of ``self`` to the end of ``other``."""
        return Span(self[0], self[1], other[2], other[3])


def split_lines(text: str, keepends: bool = False) -> list[str]:
    """The lines of a sheet, as the lexer, error positions, annotate and the prompt's save all
    count them: a line ends at "\\n" (a "\\r" before it belongs to the ending). The other
    characters that Python's ``str.splitlines`` breaks at (\\v, \\f, \\x1c–\\x1e, \\x85,
    U+2028, U+2029, a lone \\r) are characters within a line."""
    parts = text.split("\n")
    last = [parts[-1]] if parts[-1] else []
    if keepends:
        return [p + "\n" for p in parts[:-1]] + last
    return [p[:-1] if p.endswith("\r") else p for p in parts[:-1]] + last


@dataclass(frozen=True)
class Source:
    """Where text came from (a label for messages: a file name as the user knows it, or
    ``--set``), the text itself, and the file it was read from (imports are found beside it)."""

    label: str
    text: str
    path: Path | None = None

    @property
    def folder(self) -> Path | None:
        """The folder of the file the text was read from (None for text not from a file)."""
        if self.path is not None:
            return self.path.parent
        if self.label.startswith("<") or self.label.startswith("--"):
            return None
        return Path(self.label).resolve().parent

    @cached_property
    def _line_starts(self) -> list[int]:
        starts = [0]
        for line in split_lines(self.text, keepends=True):
            starts.append(starts[-1] + len(line))
        return starts

    @cached_property
    def _lines(self) -> list[str]:
        return split_lines(self.text)

    def line_text(self, line: int) -> str:
        lines = self._lines
        return lines[line - 1] if 0 < line <= len(lines) else ""

    def between(self, start: Span, end: Span | None = None) -> str:
        """The text from the start of ``start`` to the start of ``end`` (or the end of
        ``start``), with runs of white space folded to one space."""
        s = self._line_starts
        begin = s[start.line - 1] + start.column - 1
        if end is None:
            stop = s[start.end_line - 1] + start.end_column - 1
        else:
            stop = s[end.line - 1] + end.column - 1
        return " ".join(self.text[begin:stop].split())


class SheetError(Exception):
    """Base of every error a sheet, a command line or an expression can produce."""


    def __init__(
        self,
        message: str,
        span: Span | None = None,
        hint: str | None = None,
        source: Source | None = None,
    ) -> None:
        super().__init__(message)
        self.message = message
        self.span = span
        self.hint = hint
        self.source = source

    def kept(self) -> SheetError:
        """The error as a cell keeps it: without the frames that raised it, which would hold
        the whole evaluation in a reference cycle until the garbage collector came by."""
        self.__traceback__ = None
        return self

    def located(self, span: Span | None = None, source: Source | None = None) -> SheetError:
        """Fill in a span and source that are still missing; returns ``self``."""
        if self.span is None:
            self.span = span
        if self.source is None:
            self.source = source
        return self

    @property
    def location(self) -> str:
        label = self.source.label if self.source else "<sheet>"
        if self.span is None:
            return label
        return f"{label}:{self.span.line}:{self.span.column}"

    def render(self) -> str:
        """``file:line:col: message``, the source line, a caret under the span, the hint."""
        out = [f"{self.location}: {self.message}"]
        if self.span is not None and self.source is not None:
            text = self.source.line_text(self.span.line)
            if text:
                start = self.span.column - 1
                if self.span.end_line == self.span.line:
                    width = max(1, self.span.end_column - self.span.column)
                else:
                    width = max(1, len(text) - start)
                # keep tabs so the caret lines up under tab-indented text
                pad = "".join("\t" if ch == "\t" else " " for ch in text[:start])
                out.append("  " + text)
                out.append("  " + pad + "^" + "~" * (width - 1))
        if self.hint:
            out.append(f"  hint: {self.hint}")
        return "\n".join(out)

    def __str__(self) -> str:
        return self.message


class SheetSyntaxError(SheetError):
    """The text is not a sentence of the sheet language (bad character, bracket, token)."""



class InputError(SheetError):
    """The input cannot be read at all: invalid UTF-8, too large, too deeply nested."""



class NameResolutionError(SheetError):
    """A name that is unknown, ambiguous (cell and unit), reserved, or used in the wrong place."""



class UnitError(SheetError):
    """Incompatible dimensions: mismatched units, impossible conversions, dimensioned exponents."""



class CycleError(SheetError):
    """Cells that depend on themselves; ``cycle`` lists them as ``a → b → a``."""


    def __init__(self, message: str, cycle: list[str], **kwargs) -> None:
        super().__init__(message, **kwargs)
        self.cycle = cycle


class DuplicateCellError(SheetError):
    """A cell name defined on two lines."""



class DomainError(SheetError):
    """A value outside where an operation or function is defined, or a non-finite result."""



class InputFailedError(SheetError):
    """A cell could not be computed because a cell it uses failed."""


    def __init__(self, message: str, failed: list[str], **kwargs) -> None:
        super().__init__(message, **kwargs)
        self.failed = failed


class ArgumentError(SheetError):
    """A function got a wrong argument: wrong dimension, out of domain, unknown keyword.

    Raised inside functions without a span; ``argument`` names the parameter so
    the evaluator can put the caret under it.
    """


    def __init__(self, message: str, argument: str | None = None, **kwargs) -> None:
        super().__init__(message, **kwargs)
        self.argument = argument


class InternalError(SheetError):
    """A bug of relsheet's own, not of the sheet: the command line exits 70 and says so."""


    #: where to report such bugs
    REPORT = "please report this to the relsheet developers with the sheet that shows it"

    @classmethod
    def wrapping(cls, exc: BaseException, doing: str, span: Span | None = None,
                 source: Source | None = None) -> InternalError:
        """The internal error that ``exc`` (an unexpected Python exception) is, raised while
        ``doing`` something ("computing `x`"); ``--debug`` shows its traceback."""
        err = cls(f"internal error while {doing}: {type(exc).__name__}: {exc}", span,
                  hint=f"{cls.REPORT}; --debug shows the traceback", source=source)
        err.__cause__ = exc
        return err


class UsageError(SheetError):
    """The command line was used wrongly (exit code 64)."""

