"""The function catalogue as text: the listing of `relsheet funcs` and each function's entry.

Shared by the command line and the interactive prompt; generated from the
registry, so it cannot drift from what sheets can call.
"""

from __future__ import annotations

from ..errors import UsageError
from . import functions
from .units import close_matches, did_you_mean

TOPIC_TITLES = {
    "spacetime": "Spacetime around a mass",
    "orbits": "Orbits",
    "motion": "Orbits in time",
    "light": "Light and signals",
    "gyroscopes": "Gyroscopes",
    "binaries": "Binaries (general relativity, post-Keplerian parameters)",
    "strongfield": "Strong field (Schwarzschild, exact)",
    "timing": "Time and clocks",
    "math": "Mathematics",
    "arrays": "Arrays (along the last axis, or `along = axis`)",
}

CAUTION = (
    "Caution: these are first-order (post-Newtonian, weak-field) formulas unless an entry says\n"
    "otherwise, valid only in the regime each entry states. For operational navigation,\n"
    "tracking or timekeeping, the IERS Conventions and the IAU resolutions govern, and the\n"
    "responsible engineering authority decides; use relsheet to prepare and cross-check.")

_ORDER = list(TOPIC_TITLES)

#: The longest call written beside its summary in the listing.
WIDEST_CALL = 44


def listing() -> str:
    """Every function, by topic, with its signature and one-line summary."""
    specs = sorted(functions.all_functions(),
                   key=lambda f: (_ORDER.index(f.topic) if f.topic in _ORDER else 99, f.name))
    # summaries start in one column; a longer call than that stands on a line of its own
    width = min(WIDEST_CALL, max(len(f.name + f.display_signature()) for f in specs))
    lines: list[str | None] = []
    topic = None
    for spec in specs:
        if spec.topic != topic:
            topic = spec.topic
            lines += ["" if lines else None, TOPIC_TITLES.get(topic, topic)]
        call = spec.name + spec.display_signature()
        if len(call) > width:
            lines += [f"  {call}", f"  {'':<{width}}  {spec.summary}"]
        else:
            lines.append(f"  {call:<{width}}  {spec.summary}")
    lines += ["", "`relsheet funcs NAME` shows an entry: arguments, formula, validity, PPN, source.",
              "", CAUTION]
    return "\n".join(line for line in lines if line is not None)


def entries(names: list[str]) -> str:
    """The entries of several functions, the caution once at the end."""
    texts = [entry(name, caution=False) for name in names]
    specs = [functions.lookup(name) for name in names]
    if any(spec is not None and spec.topic != "math" for spec in specs):
        texts.append(CAUTION)
    return "\n\n".join(texts)


def entry(name: str, caution: bool = True) -> str:
    """One function's entry: signature, argument kinds, and its documentation."""
    spec = functions.lookup(name)
    if spec is None:
        names = [f.name for f in functions.all_functions()]
        options = ([n for n in names if name.lower() in n] + close_matches(name, names))[:4]
        raise UsageError(f"no function `{name}`",
                         hint=did_you_mean(options) or "`relsheet funcs` lists them")
    kinds = spec.argument_kinds()
    lines = [f"{spec.name}{spec.display_signature()}  →  {kinds.get('return', 'quantity')}",
             "", spec.summary, ""]
    width = max((len(p) for p in spec.signature.parameters), default=0)
    for param in spec.signature.parameters.values():
        kind = kinds.get(param.name, "quantity")
        if param.name in ("gamma", "beta"):
            kind += f" (default: the sheet's `ppn {param.name}`, else 1)"
        elif param.default is not param.empty:
            kind += " (optional)"
        lines.append(f"  {param.name:<{width}}  {kind}")
    body = spec.documentation()
    if body:
        lines += ["", body]
    if caution and spec.topic not in ("math", "arrays"):
        lines += ["", CAUTION]
    return "\n".join(lines)


def markdown_table() -> str:
    """The functions by topic as a Markdown table (the README's list is this, verbatim)."""
    specs = functions.all_functions()
    rows = ["| topic | functions |", "|---|---|"]
    for topic in _ORDER:
        names = sorted(f.name for f in specs if f.topic == topic)
        if names:
            rows.append(f"| {TOPIC_TITLES[topic]} | " + ", ".join(f"`{n}`" for n in names) + " |")
    return "\n".join(rows)


if __name__ == "__main__":  # python -m calc.catalog: the README's table of functions
    print(markdown_table())
