"""The function library: a registry of named functions callable from cells.

Each function is a pure Python function of astropy Quantities, registered with
:func:`register` under the name a sheet uses. Topic modules register their
functions when imported; :func:`lookup` imports them all on first use.
"""

from __future__ import annotations

import importlib
import inspect
import typing
from collections.abc import Callable
from dataclasses import dataclass
from functools import cached_property

from ...errors import ArgumentError

#: Topic modules, imported on the first look-up.
TOPICS = ("spacetime", "orbits", "perturbations", "light", "gyroscopes", "binaries", "strongfield",
          "elementary", "arrays", "motion", "timing")


@dataclass(frozen=True)
class FunctionSpec:
    """A registered function: its sheet name, topic, implementation and signature."""

    name: str
    topic: str
    implementation: Callable
    signature: inspect.Signature
    summary: str
    #: cannot take Monte Carlo sample arrays: runs once per sample
    samplewise: bool = False
    #: what the function does to the axes of its first argument (calc.engine.values.AXIS_EFFECTS):
    #: "elementwise", "reduce" (the last or the named axis), "keep" (its length), "shorten",
    #: "plain" (the result is on no axis) or "first" (the result is on the first argument's axes)
    effect: str = "elementwise"

    @property
    def variadic(self) -> bool:
        """Whether it takes any number of values (``max(a, b, c)``)."""
        return any(p.kind is inspect.Parameter.VAR_POSITIONAL
                   for p in self.signature.parameters.values())

    def bind(self, args: tuple, kwargs: dict) -> inspect.BoundArguments:
        """Bind call arguments, with errors a sheet author understands."""
        params = self.signature.parameters
        for key in kwargs:
            if key not in params or params[key].kind is inspect.Parameter.VAR_POSITIONAL:
                from ..units import close_matches, did_you_mean

                raise ArgumentError(f"{self.name}{self.display_signature()}: "
                                    f"no argument is called `{key}`",
                                    hint=did_you_mean(close_matches(key, list(params))))
        try:
            bound = self.signature.bind(*args, **kwargs)
        except TypeError as exc:
            raise ArgumentError(
                f"{self.name}{self.display_signature()}: {_bind_message(exc)}") from None
        return bound

    def plan(self, npositional: int, keywords: tuple[str, ...]) -> tuple[tuple[str, ...], frozenset]:
        """For a call with this many positional arguments and these keywords: the parameter
        each value goes to (``value 1`` … for variadic ones), and the parameters left out.

        Raises ArgumentError for a call that does not fit the signature. Cached: sheets
        repeat the same call shapes.
        """
        key = (self.name, npositional, keywords)
        hit = _PLANS.get(key)
        if hit is None:
            bound = self.bind(tuple(range(npositional)), {k: None for k in keywords})
            slots: list[str] = []
            for name, value in bound.arguments.items():
                if name in keywords:
                    continue
                if isinstance(value, tuple):
                    slots += [f"value {i + 1}" for i in range(len(value))]
                else:
                    slots.append(name)
            omitted = frozenset(p for p in self.signature.parameters if p not in bound.arguments)
            hit = _PLANS[key] = (tuple(slots) + keywords, omitted)
        return hit

    def display_signature(self) -> str:
        """``(M, a, e, gamma=…, beta=…)``: what a sheet writes in the call."""
        parts = []
        for p in self.signature.parameters.values():
            if p.kind is p.VAR_POSITIONAL:
                parts.append(f"{p.name}...")
            elif p.default is not p.empty:
                parts.append(f"{p.name}=…")
            else:
                parts.append(p.name)
        return "(" + ", ".join(parts) + ")"

    def argument_kinds(self) -> dict[str, str]:
        """Parameter (and ``return``) → the kind of quantity it takes, from the annotations."""
        return dict(self._kinds)

    @cached_property
    def _kinds(self) -> dict[str, str]:
        hints = typing.get_type_hints(self.implementation, include_extras=True)
        kinds: dict[str, str] = {}
        for name, hint in hints.items():
            kinds[name] = _kind(hint)
        return kinds

    @cached_property
    def text_parameters(self) -> frozenset[str]:
        """Parameters that take text in quotes (a body's name): annotated ``Annotated[str, …]``."""
        hints = typing.get_type_hints(self.implementation, include_extras=True)
        out = set()
        for name, hint in hints.items():
            args = [a for a in typing.get_args(hint) if a is not type(None)] \
                if typing.get_origin(hint) is not typing.Annotated else [hint]
            for arg in args:
                if typing.get_origin(arg) is typing.Annotated and typing.get_args(arg)[0] is str:
                    out.add(name)
        return frozenset(out)

    @cached_property
    def date_parameters(self) -> frozenset[str]:
        """Parameters that take dates (their kind mentions a date); `span` takes them too."""
        if self.name == "span":
            return frozenset({"start", "stop"})
        return frozenset(name for name, kind in self._kinds.items()
                         if "date" in kind and name != "return")

    @cached_property
    def record_parameters(self) -> frozenset[str]:
        """Parameters that take orbit records (their kind mentions a record)."""
        if self.topic in ("math", "arrays"):
            return frozenset()
        return frozenset(name for name, kind in self._kinds.items()
                         if "record" in kind and name != "return")

    def documentation(self) -> str:
        """The docstring without its summary (its first paragraph)."""
        doc = inspect.getdoc(self.implementation) or ""
        return doc.split("\n\n", 1)[1].strip() if "\n\n" in doc else ""

    def __call__(self, *args, **kwargs):
        bound = self.bind(args, kwargs)
        return self.implementation(*bound.args, **bound.kwargs)


def _kind(hint) -> str:
    """The text of an ``Annotated[Quantity, "length"]`` hint, through ``X | None``."""
    if typing.get_origin(hint) is typing.Annotated:
        return str(hint.__metadata__[0])
    args = [a for a in typing.get_args(hint) if a is not type(None)]
    if len(args) == 1:
        return _kind(args[0])
    return "quantity"


def _bind_message(exc: TypeError) -> str:
    text = str(exc)
    return {
        "too many positional arguments": "too many arguments",
    }.get(text, text.replace("'", "`"))


_REGISTRY: dict[str, FunctionSpec] = {}
_PLANS: dict[tuple, tuple] = {}
_loaded = False


def register(name: str, topic: str, samplewise: bool = False,
             effect: str = "elementwise") -> Callable[[Callable], Callable]:
    """Decorator: make ``fn`` callable from sheets as ``name``.

    ``samplewise`` marks a function that takes single values only: under Monte Carlo it
    runs once per sample.
    """

    def decorate(fn: Callable) -> Callable:
        doc = inspect.getdoc(fn) or ""
        # the first paragraph, which may run over several lines
        summary = " ".join(doc.split("\n\n", 1)[0].split()) if doc else name
        _REGISTRY[name] = FunctionSpec(name, topic, fn, inspect.signature(fn), summary,
                                       samplewise, effect)
        return fn

    return decorate


def _load_topics() -> None:
    global _loaded
    if not _loaded:
        for topic in TOPICS:
            importlib.import_module(f"{__name__}.{topic}")
        _loaded = True


def lookup(name: str) -> FunctionSpec | None:
    _load_topics()
    return _REGISTRY.get(name)


def all_functions() -> list[FunctionSpec]:
    _load_topics()
    return sorted(_REGISTRY.values(), key=lambda f: (f.topic, f.name))
