"""Seeded inputs for the fuzz harness: input ``k`` of seed ``s`` is always the same.

Three sources, chosen per input from the input's own random stream:

* ``grammar`` — sheets written by following ``grammar/sheet.lark``: cells, notes and
  headings, ``use … as … with …``, ``constants``, ``ppn``, ``check … within …``, and
  expressions with numbers, unit chains, ``±``, arrays, calls to the library's functions
  (plausible and implausible arguments, keyword arguments), ``in`` conversions, dotted
  names, records and their fields, deep nesting, long lines, Unicode names (combining marks
  included) and odd line breaks (``\\r \\x0b \\x0c \\x85 U+2028``). A sheet may import
  another generated sheet or a copy of a demo sheet.
* ``mutation`` — a demo sheet from ``sheets_demo/`` changed by a few operators: lines
  deleted, duplicated, swapped; operators flipped; numbers replaced by 0, -1, 1e308 or values
  that make NaN; garbage bytes; truncation in the middle of a token; brackets broken; cells
  renamed to unit names.
* ``soup`` — random sequences of the grammar's terminals.

Every input also carries a few lines for the interactive prompt (expressions, assignments,
``:revert``, ``:cells``, ``:deps``, ``:save``/``:write``). Nothing here imports relsheet: the
generator depends only on the seed, the index and the demo sheets' text.
"""

from __future__ import annotations

import random
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

#: The folder of the demo sheets the mutations start from.
DEMO_DIR = Path(__file__).resolve().parent.parent / "sheets_demo"

#: How often each source is chosen (out of 100).
SOURCE_WEIGHTS = {"grammar": 50, "mutation": 35, "soup": 15}


@dataclass
class FuzzInput:
    """One input: the sheet under test (``main.sheet``), files beside it and prompt lines."""

    seed: int
    index: int
    source: str
    #: bytes of ``main.sheet`` (bytes, since mutations may make it invalid UTF-8)
    main: bytes
    #: further files in the worker's folder by relative path; ``None`` makes a folder
    files: dict[str, bytes | None] = field(default_factory=dict)
    #: lines typed at the prompt (``calc.interfaces.repl.Session``)
    repl: list[str] = field(default_factory=list)
    #: whether this input also goes through ``eval --mc`` (a subset: it is slow)
    mc: bool = False

    @property
    def label(self) -> str:
        return f"seed {self.seed} input {self.index} ({self.source})"

    def size(self) -> int:
        return len(self.main) + sum(len(v or b"") for v in self.files.values()) + \
            sum(len(line) for line in self.repl)

    def to_json(self) -> dict:
        """A JSON-able form (bytes as text with surrogate escapes spelled out)."""
        return {"seed": self.seed, "index": self.index, "source": self.source,
                "main": _bytes_text(self.main),
                "files": {k: (None if v is None else _bytes_text(v)) for k, v in self.files.items()},
                "repl": list(self.repl), "mc": self.mc}


def _bytes_text(data: bytes) -> str:
    return data.decode("utf-8", errors="backslashreplace")


def generate(seed: int, index: int) -> FuzzInput:
    """Input ``index`` of ``seed``: the same text every time (for the same demo sheets)."""
    rng = random.Random(f"relsheet-fuzz/{seed}/{index}")
    source = rng.choices(list(SOURCE_WEIGHTS), weights=list(SOURCE_WEIGHTS.values()))[0]
    if source == "grammar":
        made = _grammar_input(rng)
    elif source == "mutation":
        made = _mutation_input(rng)
    else:
        made = _soup_input(rng)
    main, files, names = made
    repl = _repl_lines(rng, names)
    text = main.decode("utf-8", errors="replace")
    mc = ("±" in text or "+/-" in text) and rng.random() < 0.12
    return FuzzInput(seed, index, source, main, files, repl, mc)


# ---------------------------------------------------------------------------------------
# vocabulary

PLAIN_NUMBERS = ["0", "1", "2", "3", "12", "0.5", "1.5e-3", "6.674_30e-11", "1e10", "2.5", "100",
                 ".5", "1.", "1_000", "42", "3.0e+8", "1e\u22123", "0.061", "0.92", "1.35",
                 "7.9", "0.137", "36525", "6930", "1.438"]
EXTREME_NUMBERS = ["1e308", "1.7976931348623157e308", "1e309", "1e-320", "4.9e-324", "1e-400",
                   "0.0", "1e300", "1e-30", "99999999999999999999999", "1" + "0" * 400,
                   "0." + "0" * 330 + "1", "2.2250738585072014e-308", "1e-308", "9e15",
                   "9007199254740993", "1_2_3.4_5e1_0"]
PERCENTS = ["5%", "0.5%", "1e-6%", "100%", "1e3%", "0%"]

UNITS: dict[str, list[str]] = {
    "length": ["m", "km", "cm", "AU", "au", "pc", "kpc", "Rsun", "Rearth", "lsec", "lyr", "mm"],
    "time": ["s", "ms", "us", "ns", "d", "h", "min", "yr", "Myr", "century"],
    "mass": ["kg", "g", "Msun", "Mearth", "Mjup", "solMass"],
    "angle": ["deg", "rad", "arcsec", "mas", "uas", "arcmin"],
    "speed": ["km / s", "m s^-1", "km s^-1", "AU / d"],
    "gm": ["m^3 s^-2", "km^3 / s^2", "m^3 / s^2"],
    "angmom": ["kg m^2 / s", "kg m^2 s^-1"],
    "rate": ["deg / yr", "arcsec / century", "rad / s", "mas / yr"],
    "dimensionless": [""],
}
ODD_UNITS = ["cy", "cyr", "kmz", "a", "t", "e", "h", "d", "G", "c", "furlong", "ppm", "ppb",
             "dimensionless", "Jy", "K", "Hz", "erg", "eV", "AU^0.5", "m^(1/2)", "s^-1.5",
             "km^100", "m^1e10", "m^(-2)^0.5", "m^-(2)", "deg^2", "cycle", "annum", "ly",
             "M_sun", "mag", "dex", "bit", "adu", "Ry", "littleh", "u", "Angstrom", "\u00c5"]

NAMES = ["x", "y", "z", "a", "b", "c", "d", "e", "t", "h", "m", "r", "v", "M", "G", "GM", "P",
         "a_b", "e_b", "m1", "m2", "dt", "rate", "adv", "phase", "k", "n", "s", "pc", "km", "AU",
         "yr", "deg", "rad", "J2", "R", "J", "sigma", "omega", "pi", "inf", "const", "sys",
         "M_star", "budget", "orb", "r_peri", "P_b", "x1", "x2", "_", "__", "_x", "val"]
UNICODE_NAMES = ["\u03c9", "\u03c9\u0307", "\u1e56b", "P\u0307b", "\u0394t", "\u03b1\u2081",
                 "\u540d\u524d", "x\u0301", "\u01c5", "\ufb01", "\U0001d465", "\u0130", "\u00df",
                 "\u00b5", "\u03bc", "\u2126", "\u03a9", "\u212b", "\u0301x", "\u0660x",
                 "x\u200d", "\u03b3", "\u03b2", "\u0435", "\u0441", "a" * 200, "Ω_dot"]
KEYWORDS = ["constants", "ppn", "check", "use", "as", "with", "within", "in"]

FUNCTION_SIGNATURES: dict[str, list[tuple[str, str, bool]]] = {
    # name: [(parameter, kind, required)] as the library's entries state them
    "schwarzschild_radius": [("M", "mass", True)],
    "proper_radial_distance": [("M", "mass", True), ("r1", "length", True), ("r2", "length", True)],
    "gravitational_redshift": [("M", "mass", True), ("r_emit", "length", True),
                               ("r_obs", "length", True)],
    "clock_rate": [("M", "mass", True), ("r", "length", True), ("v", "speed", False)],
    "eccentricity_clock_term": [("M", "mass", True), ("a", "length", True),
                                ("e", "eccentricity", True)],
    "orbital_period": [("M", "mass", True), ("a", "length", True)],
    "semi_major_axis": [("M", "mass", True), ("P", "time", True)],
    "orbital_speed": [("M", "mass", True), ("r", "length", True), ("a", "length", False)],
    "periapsis_advance": [("M", "mass", True), ("a", "length", True), ("e", "eccentricity", True),
                          ("gamma", "ppn", False), ("beta", "ppn", False)],
    "periapsis_rate": [("M", "mass", True), ("a", "length", True), ("e", "eccentricity", True),
                       ("gamma", "ppn", False), ("beta", "ppn", False)],
    "oblateness_rate": [("M", "mass", True), ("J2", "small", True), ("R", "length", True),
                        ("a", "length", True), ("e", "eccentricity", True), ("i", "angle", False)],
    "lense_thirring_node_rate": [("J", "angmom", True), ("a", "length", True),
                                 ("e", "eccentricity", True)],
    "orbit": [("a", "length", True), ("e", "eccentricity", True), ("i", "angle", False),
              ("node", "angle", False), ("long_peri", "angle", False),
              ("arg_peri", "angle", False), ("m", "mass", False)],
    "perturbation_rate": [("M", "mass", True), ("target", "orbit", True),
                          ("perturber", "orbit", True), ("grid", "grid", False)],
    "periapsis_budget": [("M", "mass", True), ("target", "orbit", True),
                         ("perturbers", "orbits", True), ("J2", "small", False),
                         ("R", "length", False), ("J", "angmom", False), ("gamma", "ppn", False),
                         ("beta", "ppn", False), ("grid", "grid", False)],
    "deflection": [("M", "mass", True), ("b", "length", True), ("gamma", "ppn", False)],
    "deflection_at_elongation": [("M", "mass", True), ("r_obs", "length", True),
                                 ("elongation", "angle", True), ("gamma", "ppn", False)],
    "einstein_radius": [("M", "mass", True), ("d_lens", "length", True),
                        ("d_source", "length", True)],
    "shapiro_delay": [("M", "mass", True), ("r_emit", "length", True), ("r_recv", "length", True),
                      ("separation", "length", True), ("gamma", "ppn", False)],
    "conjunction_delay": [("M", "mass", True), ("r_emit", "length", True),
                          ("r_recv", "length", True), ("b", "length", True),
                          ("gamma", "ppn", False)],
    "geodetic_rate": [("M", "mass", True), ("r", "length", True), ("gamma", "ppn", False)],
    "frame_dragging_rate": [("J", "angmom", True), ("r", "length", True)],
    "periastron_rate": [("m1", "mass", True), ("m2", "mass", True), ("Pb", "time", True),
                        ("e", "eccentricity", True)],
    "einstein_delay_amplitude": [("m1", "mass", True), ("m2", "mass", True),
                                 ("Pb", "time", True), ("e", "eccentricity", True)],
    "orbital_decay_rate": [("m1", "mass", True), ("m2", "mass", True), ("Pb", "time", True),
                           ("e", "eccentricity", True)],
    "merger_time": [("m1", "mass", True), ("m2", "mass", True), ("Pb", "time", True),
                    ("e", "eccentricity", True)],
    "shapiro_range": [("m2", "mass", True)],
    "shapiro_shape": [("m1", "mass", True), ("m2", "mass", True), ("Pb", "time", True),
                      ("x", "time", True)],
    "chirp_mass": [("m1", "mass", True), ("m2", "mass", True)],
    "sqrt": [("x", "any", True)], "exp": [("x", "small", True)], "ln": [("x", "any", True)],
    "log10": [("x", "any", True)], "sin": [("x", "angle", True)], "cos": [("x", "angle", True)],
    "tan": [("x", "angle", True)], "asin": [("x", "small", True)], "acos": [("x", "small", True)],
    "atan": [("x", "any", True)], "atan2": [("y", "length", True), ("x", "length", True)],
    "abs": [("x", "any", True)], "sum": [("x", "array", True)], "mean": [("x", "array", True)],
    "span": [("start", "length", True), ("stop", "length", True), ("n", "count", True)],
    "logspan": [("start", "length", True), ("stop", "length", True), ("n", "count", True)],
}
VARIADIC = ["hypot", "min", "max"]
#: functions by the kind of quantity they return (for dimensionally consistent sheets)
RETURNS: dict[str, list[str]] = {
    "length": ["schwarzschild_radius", "semi_major_axis", "proper_radial_distance"],
    "time": ["orbital_period", "shapiro_delay", "conjunction_delay", "eccentricity_clock_term",
             "merger_time", "einstein_delay_amplitude", "shapiro_range"],
    "mass": ["chirp_mass"],
    "angle": ["deflection", "periapsis_advance", "einstein_radius", "deflection_at_elongation"],
    "rate": ["periapsis_rate", "geodetic_rate", "periastron_rate", "oblateness_rate",
             "lense_thirring_node_rate", "frame_dragging_rate"],
    "speed": ["orbital_speed"],
    "dimensionless": ["clock_rate", "gravitational_redshift", "orbital_decay_rate",
                      "shapiro_shape"],
}
UNKNOWN_FUNCTIONS = ["foo", "deflect", "Sqrt", "orbit2", "print", "eval", "__import__", "open",
                     "getattr", "type", "len", "table", "plot", "solve", "date"]

RECORD_FIELDS = ["a", "e", "i", "node", "long_peri", "arg_peri", "m", "total", "gr",
                 "oblateness", "lense_thirring", "orvane_c", "bogus", "A", "__class__",
                 "__dict__", "fields", "label"]
CONSTANT_NAMES = ["c", "G", "h", "hbar", "k_B", "GM_sun", "GM_earth", "GM_jup", "M_sun", "R_sun",
                  "M_earth", "R_earth", "au", "pc", "g0", "e", "m_e", "sigma_sb", "bogus",
                  "__class__", "L_sun"]
CONSTANT_SETS = ["codata2014", "codata2018", "codata2022", "iau2012", "iau2015", "uncertain",
                 "codata2010", "iau2000", "astropy", "CODATA2018", "codata2018,"]

ODD_BREAKS = ["\r", "\x0b", "\x0c", "\x85", "\u2028", "\u2029", "\x1c", "\x1d", "\x1e",
              "\r\n", "\n\r"]
GARBAGE = [b"\xff", b"\xfe", b"\x00", b"\xc3", b"\xe2\x82", b"\xed\xa0\x80", b"\x80", b"\x1b[31m",
           b"\x7f", b"\x08", "\u00b0".encode(), "\u00b5".encode(), "\u221e".encode(),
           "\u221a".encode(), "\ufeff".encode(), "\u00a0".encode(), "\u3000".encode(),
           "\u200b".encode(), "\U0001f600".encode(), b"{0}", b"{unit.__class__.__mro__}", b"%s",
           b"\\", b"`", b"$", b"@", b"!", b"?", b";", b":", b"'", b'"', b"&", b"|", b"~", b"{",
           b"}", b"\t", b"        ", b"\\immediate\\write18{ls}"]

REPL_COMMANDS = [":cells", ":revert", ":help", ":funcs", ":funcs deflection", ":funcs nope",
                 ":bogus", ":deps", ":users", ":", ":quit", ":cells extra", ":revert a b",
                 ":save saved.sheet", ":write saved.sheet", ":save", ":write",
                 ":save sub", ":write sub", ":save saved.sheet extra", ":save /nonexistent/x.sheet"]


# ---------------------------------------------------------------------------------------
# grammar-aware sheets

class _Writer:
    """Writes one sheet statement by statement, remembering the names it defined."""

    def __init__(self, rng: random.Random, names: list[str] | None = None) -> None:
        self.rng = rng
        self.cells: list[str] = list(names or [])
        self.records: list[str] = []
        self.namespaces: dict[str, list[str]] = {}
        self.files: dict[str, bytes | None] = {}
        self.unicode = rng.random() < 0.15
        #: 0 writes dimensionally consistent sheets that mostly evaluate; 1 anything the
        #: grammar allows
        self.wild = rng.choice([0.0, 0.0, 0.3, 1.0])
        #: the kind of quantity each tame cell holds
        self.kinds: dict[str, str] = {}

    # -- names
    def new_name(self) -> str:
        r = self.rng.random()
        if self.unicode and r < 0.3:
            return self.rng.choice(UNICODE_NAMES)
        if r < 0.1:
            return self.rng.choice(UNICODE_NAMES + KEYWORDS + ["const", "ppn"])
        if r < 0.45:
            return self.rng.choice(NAMES)
        length = self.rng.randint(1, 8)
        first = self.rng.choice("abcdefghijklmnopqrstuvwxyzMRGPJ_")
        rest = "".join(self.rng.choice("abcdefghijklmnopqrstuvwxyz0123456789_")
                       for _ in range(length - 1))
        return first + rest

    def some_cell(self) -> str:
        if self.cells and self.rng.random() < 0.85:
            return self.rng.choice(self.cells)
        return self.new_name()

    # -- numbers and units
    def number(self) -> str:
        r = self.rng.random()
        if r < 0.55:
            return self.rng.choice(PLAIN_NUMBERS)
        if r < 0.55 + 0.15 * (0.3 + self.wild):
            return self.rng.choice(EXTREME_NUMBERS)
        if r < 0.75:
            return self.rng.choice(PERCENTS)
        mantissa = self.rng.uniform(0.1, 9.9)
        exponent = self.rng.choice([0, 0, 0, 1, 2, -1, -3, 6, 12, -12, 20, 30, -30, 100, -100])
        digits = self.rng.randint(1, 17)
        return f"{mantissa * 10.0 ** exponent:.{digits}g}".replace("e+", "e")

    def unit(self, kind: str | None = None) -> str:
        if kind is None or self.rng.random() < 0.08 * self.wild:
            if self.rng.random() < 0.3:
                return self.rng.choice(ODD_UNITS)
            kind = self.rng.choice(list(UNITS))
        choices = UNITS.get(kind) or [""]
        return self.rng.choice(choices)

    def unit_expr(self, depth: int = 0) -> str:
        """A unit expression after `in`: every name is a unit."""
        r = self.rng.random()
        if depth > 2 or r < 0.55:
            unit = self.unit()
            return unit or self.rng.choice(["%", "1", "rad", "deg"])
        if r < 0.7:
            return f"{self.unit_expr(depth + 1)} / {self.unit_expr(depth + 1)}"
        if r < 0.8:
            return f"({self.unit_expr(depth + 1)})"
        if r < 0.9:
            return f"{self.unit_expr(depth + 1)} {self.unit_expr(depth + 1)}"
        return f"{self.rng.choice(list(sum(UNITS.values(), [])) or ['m'])}^{self.exponent()}"

    def exponent(self) -> str:
        return self.rng.choice(["2", "3", "-1", "-2", "0.5", "(1/2)", "(-2)", "0", "1e3", "-0.5",
                                "(2)^0.5", "(1/0)", "(-1)^0.5", "1e308", "(x)"])

    def quantity(self, kind: str) -> str:
        """A literal of a kind of quantity, sometimes with an uncertainty or as an array."""
        rng = self.rng
        if kind == "eccentricity":
            base = rng.choice(["0", "0.1", "0.137", "0.5", "0.9", "0.999999", "1", "1.5", "-0.1",
                               "0.28 \u00b1 0.01", "[0.1, 0.2, 0.3]", "1e-320"])
            return base
        if kind == "ppn":
            return rng.choice(["1", "1 + 2.1e-5", "0", "-1", "1e308", "0.99 \u00b1 0.01", "2"])
        if kind == "small":
            return rng.choice(["1.5e-6", "0.5", "0", "-1", "2", "1e-3 \u00b1 1e-4", "0.999",
                               "1e308", "[0.1, 0.5, 0.9]"])
        if kind == "count":
            # (10^7-element arrays are tested on their own: writing them takes seconds)
            return rng.choice(["5", "9", "1", "0", "-1", "2.5", "1e4", "1e5", "3 km", "2"])
        if kind == "grid":
            return rng.choice(["64", "16", "0", "-1", "3", "2.5", "1e9", "1 AU"])
        if kind == "orbit":
            if self.records and rng.random() < 0.7:
                return rng.choice(self.records)
            return self.call("orbit", depth=3, plausible=rng.random() < 0.8)
        if kind == "orbits":
            items = [self.quantity("orbit") for _ in range(rng.randint(0, 3))]
            return "[" + ", ".join(items) + "]" if rng.random() < 0.85 else self.quantity("orbit")
        if kind == "array":
            return rng.choice([f"[{', '.join(self.number() for _ in range(rng.randint(0, 6)))}]"
                               f" {self.unit()}".rstrip(),
                               f"span(1 {self.unit('length')}, 2 AU, {self.quantity('count')})",
                               self.some_cell()])
        if kind == "any":
            kind = rng.choice(["length", "mass", "time", "angle", "dimensionless"])
        unit_kind = {"mass": rng.choice(["mass", "mass", "gm"])}.get(kind, kind)
        if kind == "mass" and rng.random() < 0.15:
            return rng.choice(["const.GM_sun", "const.M_sun", "const.GM_earth", "1 Msun",
                               "const.G * 1 Msun"])
        value = rng.choice(["1", "0.92", "1.35", "7000", "0.061", "2.5", "30", "1.4"])
        r = rng.random()
        if r < 0.12 * (0.3 + self.wild):
            value = rng.choice(["-1", "0", "-0.5", "1e308", "1e-320", "inf", "(0/0)", "-inf",
                                "4.9e-324", "1e300"])
        unit = self.unit(unit_kind)
        if rng.random() < 0.05 * self.wild:
            unit = self.unit()  # a wrong dimension
        if r > 0.85:
            return f"{value} \u00b1 {rng.choice(['0.01', '0.1', '1e-5', '0', '-1', '1e300'])} {unit}".rstrip()
        if r > 0.8:
            return f"[{value}, {self.number()}, 2] {unit}".rstrip()
        if r > 0.75 and self.cells:
            return self.some_cell()
        return f"{value} {unit}".rstrip()

    # -- expressions
    def call(self, name: str | None = None, depth: int = 0, plausible: bool = True) -> str:
        rng = self.rng
        if name is None:
            r = rng.random()
            if r < 0.07:
                name = rng.choice(UNKNOWN_FUNCTIONS)
            elif r < 0.15:
                name = rng.choice(VARIADIC)
            else:
                name = rng.choice(list(FUNCTION_SIGNATURES))
        if name in VARIADIC:
            values = [self.expr(depth + 1) for _ in range(rng.randint(0, 4))]
            return f"{name}({', '.join(values)})"
        params = FUNCTION_SIGNATURES.get(name)
        if params is None:
            return f"{name}({', '.join(self.expr(depth + 1) for _ in range(rng.randint(0, 3)))})"
        args: list[str] = []
        keywords = rng.random() < 0.3
        for param, kind, required in params:
            if not required and rng.random() < 0.6:
                continue
            value = self.quantity(kind) if plausible or rng.random() < 0.5 else self.expr(depth + 1)
            if keywords or not required or (args and "=" in args[-1]):
                args.append(f"{param} = {value}")
            else:
                args.append(value)
        if not plausible:
            r = rng.random()
            if r < 0.2 and args:
                args.pop(rng.randrange(len(args)))
            elif r < 0.4:
                args.append(self.expr(depth + 1))
            elif r < 0.55:
                args.append(f"{rng.choice(['gama', 'bogus', 'M', 'e', 'x', 'values'])} = "
                            f"{self.expr(depth + 1)}")
            elif r < 0.65 and args:
                args.append(args[0])
            elif r < 0.75:
                rng.shuffle(args)
        if rng.random() < 0.03:
            args.append("")  # a trailing comma
        return f"{name}({', '.join(args)})"

    def atom(self, depth: int) -> str:
        rng = self.rng
        r = rng.random()
        if r < 0.22:
            return self.number()
        if r < 0.42:
            unit = self.unit()
            number = self.number()
            if rng.random() < 0.3:
                unit = f"{unit} {self.unit()}" if unit else self.unit()
            return f"{number} {unit}".rstrip()
        if r < 0.55:
            return self.some_cell()
        if r < 0.62:
            return self.dotted()
        if r < 0.78:
            return self.call(depth=depth, plausible=rng.random() < 0.7)
        if r < 0.84:
            return self.measured()
        if r < 0.9:
            n = rng.choice([0, 1, 2, 3, 5, 8])
            items = ", ".join(self.expr(depth + 1) for _ in range(n))
            unit = self.unit() if rng.random() < 0.4 else ""
            return f"[{items}] {unit}".rstrip()
        if r < 0.95:
            return rng.choice(["pi", "inf", "-inf", "2 pi", "e", "c", "G"])
        return f"({self.expr(depth + 1)})"

    def measured(self) -> str:
        rng = self.rng
        value, sigma = self.number(), rng.choice(["0.01", "0.1", "1", "0", "1e-30", "1e300",
                                                  "-0.1", self.number()])
        unit = self.unit()
        pm = rng.choice(["\u00b1", "+/-", " \u00b1 ", " +/- "])
        form = rng.random()
        if form < 0.5:
            return f"{value} {pm} {sigma} {unit}".rstrip()
        if form < 0.75:
            return f"({value} {pm} {sigma}) {unit}".rstrip()
        if form < 0.9:
            return f"{value} {unit} {pm} {sigma} {unit}".rstrip()
        return f"[{value}, {self.number()}] {pm} [{sigma}, {sigma}] {unit}".rstrip()

    def dotted(self) -> str:
        rng = self.rng
        r = rng.random()
        if r < 0.35:
            return f"const.{rng.choice(CONSTANT_NAMES)}"
        if r < 0.6 and self.namespaces:
            ns = rng.choice(list(self.namespaces))
            cells = self.namespaces[ns] or ["x"]
            name = rng.choice(cells)
            if rng.random() < 0.2:
                return f"{ns}.{name}.{rng.choice(RECORD_FIELDS)}"
            return f"{ns}.{name}"
        if r < 0.85 and self.records:
            return f"{rng.choice(self.records)}.{rng.choice(RECORD_FIELDS)}"
        return f"{self.some_cell()}.{rng.choice(RECORD_FIELDS + ['x', 'y.z'])}"

    def expr(self, depth: int = 0) -> str:
        rng = self.rng
        if depth > 4 or rng.random() < 0.35 + depth * 0.12:
            return self.atom(depth)
        r = rng.random()
        if r < 0.45:
            op = rng.choice(["+", "-", "*", "/", "^", "**", "\u00d7", "\u00b7", "\u2212", " * ",
                             " / ", " + ", " - "])
            return f"{self.expr(depth + 1)} {op} {self.expr(depth + 1)}"
        if r < 0.55:
            return f"-{self.expr(depth + 1)}" if rng.random() < 0.7 else f"+{self.expr(depth + 1)}"
        if r < 0.7:
            return f"({self.expr(depth + 1)})"
        if r < 0.8:
            # a chain after a group: `(1 + x) AU`, `3 (km / dt)`
            return f"({self.expr(depth + 1)}) {self.unit()}".rstrip()
        if r < 0.9:
            return self.call(depth=depth + 1, plausible=rng.random() < 0.6)
        return f"{self.expr(depth + 1)} {self.unit()}".rstrip()

    def special_expr(self) -> str:
        """Shapes that stress the parser and the engine: deep nesting, long lines."""
        rng = self.rng
        r = rng.random()
        if r < 0.2:
            n = rng.choice([10, 40, 63, 64, 65, 100, 300])
            return "(" * n + "1" + ")" * n
        if r < 0.35:
            n = rng.choice([5, 20, 63, 65])
            return "sqrt(" * n + "4" + ")" * n
        if r < 0.5:
            n = rng.choice([100, 300, 1000])
            return " + ".join(["1"] * n)
        if r < 0.6:
            n = rng.choice([100, 500, 2000])
            return "[" + ", ".join(str(i) for i in range(n)) + "] km"
        if r < 0.7:
            n = rng.choice([10, 62, 64, 70])
            return "[" * n + "1" + "]" * n
        if r < 0.8:
            return " ".join([self.number()] + [self.unit() or "m" for _ in range(rng.randint(5, 40))])
        if r < 0.9:
            return "2^" * rng.choice([3, 10, 50]) + "2"
        return "-" * rng.choice([2, 10, 100, 1000]) + "1"

    def typed(self, kind: str, depth: int = 0) -> str:
        """A dimensionally consistent expression of a kind of quantity (tame sheets)."""
        rng = self.rng
        r = rng.random()
        same = [c for c, k in self.kinds.items() if k == kind]
        if depth > 2 or r < 0.35:
            return self.quantity(kind)
        if r < 0.55 and same:
            return rng.choice(same)
        if r < 0.68:
            return f"{self.typed(kind, depth + 1)} {rng.choice(['+', '-'])} {self.typed(kind, depth + 1)}"
        if r < 0.78:
            if rng.random() < 0.5:
                return f"{self.typed('dimensionless', depth + 1)} * {self.typed(kind, depth + 1)}"
            return f"{self.typed(kind, depth + 1)} / {rng.choice(['2', '3', '1e3', '2 pi', '0'])}"
        if r < 0.9 and RETURNS.get(kind):
            return self.call(rng.choice(RETURNS[kind]), depth=depth + 1)
        if r < 0.95 and kind in ("length", "time", "mass"):
            return rng.choice([f"sqrt({self.typed(kind, depth + 1)}^2)",
                               f"max({self.typed(kind, depth + 1)}, {self.typed(kind, depth + 1)})",
                               f"abs({self.typed(kind, depth + 1)})"])
        return f"({self.typed(kind, depth + 1)})"

    def tame_cell(self, name: str) -> str:
        rng = self.rng
        r = rng.random()
        if r < 0.1:
            self.records.append(name)
            return self.call("orbit")
        if r < 0.13:
            self.records.append(name)
            return self.call("periapsis_budget")
        if r < 0.15 and self.records:
            return self.record_misuse()
        if r < 0.2 and self.records:
            self.kinds[name] = "angle" if rng.random() < 0.5 else "length"
            return f"{rng.choice(self.records)}.{rng.choice(['a', 'e', 'i', 'node', 'total', 'gr'])}"
        kind = rng.choice(list(RETURNS))
        body = self.typed(kind)
        self.kinds[name] = kind
        if rng.random() < 0.2 and UNITS.get(kind, [""])[0]:
            body += f" in {self.unit(kind)}"
        return body

    # -- statements
    def cell(self) -> str:
        rng = self.rng
        name = self.new_name() if rng.random() < 0.75 or not self.cells else rng.choice(self.cells)
        if rng.random() >= self.wild:
            body = self.tame_cell(name)
            if name not in self.cells:
                self.cells.append(name)
            return f"{name} = {body}"
        r = rng.random()
        if r < 0.06:
            body = self.special_expr()
        elif r < 0.09 and self.records:
            body = self.record_misuse()
        elif r < 0.2:
            body = self.call("orbit", plausible=rng.random() < 0.8)
            self.records.append(name)
        elif r < 0.24:
            body = self.call("periapsis_budget", plausible=rng.random() < 0.7)
            self.records.append(name)
        else:
            body = self.expr()
        if rng.random() < 0.2:
            body += f" in {self.unit_expr()}"
        if name not in self.cells:
            self.cells.append(name)
        return f"{name} = {body}"

    def check(self) -> str:
        rng = self.rng
        r = rng.random()
        if r < 0.08:
            # arrays of different lengths on the two sides
            n, m = rng.choice([(2, 3), (1, 4), (3, 3), (0, 2)])
            op = rng.choice(["<", ">=", "=="])
            tail = f" within {rng.choice(['1%', '2 sigma', '1 km'])}" if op == "==" else ""
            return (f"check [{', '.join(str(i + 1) for i in range(n))}] {op} "
                    f"[{', '.join(str(i + 1) for i in range(m))}]{tail}")
        if r < 0.14:
            # a function of a plain number against an uncertain cell, or a record in a check
            other = rng.choice(self.cells) if self.cells else self.measured()
            left = rng.choice(["atan(4)", "sqrt(2)", "ln(3)", "cos(1)", "1",
                               self.record_misuse() if self.records else "2"])
            return f"check {left} {rng.choice(['==', '>', '<'])} {other}" + \
                rng.choice([" within 2 sigma", " within 1%", ""])
        if rng.random() >= self.wild and self.kinds:
            name = rng.choice(list(self.kinds))
            kind = self.kinds[name]
            op = rng.choice(["==", "<", ">", ">=", "<="])
            tail = ""
            if op == "==":
                tail = " within " + rng.choice(["1%", "2 sigma", "0.5%", self.quantity(kind)])
            return f"check {name} {op} {self.typed(kind, 1)}{tail}"
        left, right = self.expr(2), self.expr(2)
        op = rng.choice(["==", "<", "<=", ">", ">=", "=", "!="])
        tail = ""
        if op == "==" or rng.random() < 0.1:
            tail = " within " + rng.choice(["1%", "0.5%", "2 sigma", "0.1 arcsec", "0", "-1%",
                                            "inf", "1e-6%", "2", "1 sigma sigma", self.expr(3)])
        return f"check {left} {op} {right}{tail}"

    def use(self, own_index: int) -> str:
        rng = self.rng
        namespace = rng.choice(["sys", "lib", "L", "k", "ns", "venus", self.new_name()])
        r = rng.random()
        overrides: list[str] = []
        if r < 0.4:
            path = "orvane_system.sheet"
            self.files[path] = demo_sheets()[path]
            self.namespaces[namespace] = ["M_star", "R_star", "J2_star", "J_star", "orvane_b",
                                          "orvane_c", "orvane_d", "orvane_e", "GM_d", "R_d",
                                          "year_d", "nope"]
            for name in ["orvane_b", "orvane_c", "orvane_d", "orvane_e"]:
                self.records.append(f"{namespace}.{name}")
            if rng.random() < 0.3:
                overrides.append(f"M_star = {self.quantity('mass')}")
        elif r < 0.75:
            path = rng.choice(["lib.sheet", "lib2.sheet", "sub/lib.sheet"])
            if path not in self.files:
                inner = _Writer(rng)
                inner.unicode = self.unicode
                lines = [inner.cell() for _ in range(rng.randint(1, 6))]
                if rng.random() < 0.15:
                    lines.append(rng.choice(['use "main.sheet" as back',
                                             'use "lib.sheet" as self_',
                                             'use "../main.sheet" as up']))
                self.files[path] = ("\n".join(lines) + "\n").encode()
                self.namespaces[namespace] = inner.cells
            if rng.random() < 0.5 and self.namespaces.get(namespace):
                for _ in range(rng.randint(1, 3)):
                    overrides.append(f"{rng.choice(self.namespaces[namespace])} = {self.expr(3)}")
        else:
            path = rng.choice(["missing.sheet", "../up.sheet", "main.sheet", "lib.txt", "dir.sheet",
                               "a" * 300 + ".sheet", "", "sub/../main.sheet", "/etc/passwd.sheet",
                               "orvane_system", "./orvane_system.sheet", "\u00e9.sheet"])
            if path == "dir.sheet":
                self.files[path] = None
            if path.endswith("orvane_system.sheet") or path == "orvane_system":
                self.files["orvane_system.sheet"] = demo_sheets()["orvane_system.sheet"]
            self.namespaces.setdefault(namespace, ["x"])
        text = f'use "{path}" as {namespace}'
        if overrides or rng.random() < 0.05:
            text += " with " + ", ".join(overrides or ["x = 1"])
        return text

    def statement(self, index: int) -> str:
        rng = self.rng
        r = rng.random()
        if r < 0.58:
            line = self.cell()
        elif r < 0.64:
            line = "# " + rng.choice(["a note", "Orvane b", "{0} {unit.__class__.__mro__}", "%s %d",
                                      "ω̇ and Ṗb", "#= 3 km", "", "\\section{x}", "<b>html</b>"])
        elif r < 0.68:
            line = "## " + rng.choice(["The star", "Orbit", "{}", "∞", "x" * 300, ""])
        elif r < 0.73:
            line = ""
        elif r < 0.83:
            line = self.check()
        elif r < 0.89:
            line = self.use(index)
        elif r < 0.93:
            line = "constants " + " ".join(rng.choice(CONSTANT_SETS)
                                           for _ in range(rng.randint(0, 3)))
        elif r < 0.97:
            line = f"ppn {rng.choice(['gamma', 'beta', 'gamma', 'gama', 'alpha'])} = " \
                   f"{self.quantity('ppn') if rng.random() < 0.7 else self.expr()}"
        else:
            line = self.multiline()
        if line and rng.random() < 0.12:
            line += rng.choice(["  # why", "  #= 3 km", "\t#= stale", " #=", "  # {0}", "#= x",
                                "  #= error: internal", "   # ω̇"])
        return line

    def multiline(self) -> str:
        """A statement continued on the next lines inside an open bracket, with comments
        (some with text a format string would read as fields)."""
        rng = self.rng
        name = self.new_name()
        self.cells.append(name)
        comment = rng.choice(["# comment", "# {0}", "# {unit.__class__.__mro__}", "#= x", "# }{",
                              "# %s", ""])
        if rng.random() < 0.4:
            # a group continued over lines, then a name after it: unit or cell?
            after = rng.choice(self.cells + ["a", "t", "d", "h", "km", "AU"])
            return f"{name} = ({self.expr(3)}  {comment}\n  ) {after}"
        items = [self.expr(3) for _ in range(rng.randint(1, 4))]
        joiner = rng.choice([",\n    ", f",  {comment}\n  ", ",\n\n", ",\r\n  ", ", #= x\n"])
        return f"{name} = [{joiner.join(items)}\n] {self.unit()}".rstrip()

    def record_misuse(self) -> str:
        """Records where numbers belong: arithmetic, powers, comparisons."""
        rng = self.rng
        record = rng.choice(self.records) if self.records else self.call("orbit")
        return rng.choice([f"{record}^2", f"2^{record}", f"-{record}", f"{record} * 2 AU",
                           f"{record} + {record}", f"sqrt({record})", f"[{record}, 1 AU]",
                           f"{record} in AU", f"{record}.a^{record}.e"])


def _finish(rng: random.Random, lines: list[str]) -> bytes:
    """Join lines with a line-break style of this input; odd breaks and trailing blanks
    sometimes; a missing final newline sometimes."""
    style = rng.random()
    if style < 0.82:
        text = "\n".join(lines)
    elif style < 0.9:
        text = "\r\n".join(lines)
    else:
        parts = []
        for line in lines:
            parts.append(line)
            parts.append(rng.choice(ODD_BREAKS) if rng.random() < 0.3 else "\n")
        text = "".join(parts[:-1])
    if rng.random() < 0.06:
        # runs of blanks at the end of a line or of the file
        at = rng.randrange(len(text) + 1)
        text = text[:at] + " " * rng.choice([5, 16, 24, 30, 40]) + text[at:]
    if rng.random() < 0.04:
        text += rng.choice(["\t", "   ", " " * 30, "\f"])
    elif rng.random() < 0.85:
        text += "\n"
    data = text.encode("utf-8")
    if rng.random() < 0.03:
        data = b"\xef\xbb\xbf" + data
    return data


def _grammar_input(rng: random.Random) -> tuple[bytes, dict[str, bytes | None], list[str]]:
    writer = _Writer(rng)
    count = rng.choice([1, 2, 3, 5, 8, 12, 20, 30])
    lines = [writer.statement(i) for i in range(count)]
    if rng.random() < 0.05:
        # a cycle through a third cell
        lines += ["a = b", "b = a + c", "c = a"]
        writer.cells += ["a", "b", "c"]
    return _finish(rng, lines), writer.files, writer.cells


# ---------------------------------------------------------------------------------------
# mutations of the demo sheets

@lru_cache(maxsize=1)
def _demo_cache() -> tuple[tuple[str, bytes], ...]:
    return tuple((p.name, p.read_bytes()) for p in sorted(DEMO_DIR.glob("*.sheet")))


def demo_sheets() -> dict[str, bytes]:
    """The demo sheets by file name (read once)."""
    return dict(_demo_cache())


_OPERATORS = ["+", "-", "*", "/", "^", "=", "==", "<", ">", "\u00b1", "(", ")", "[", "]", ",",
              "**", "<=", ">=", ".", " in ", "%"]
_NUMBER_SWAPS = ["0", "-1", "1e308", "1e-320", "4.9e-324", "(0/0)", "inf", "-0", "1e400",
                 "99999999999999999999", "1_", "0x10", "1.2.3", "-inf", "1e-30", "1e300",
                 "(1-1)", "nan", "2"]
_RENAMES = ["a", "t", "d", "h", "m", "s", "AU", "km", "e", "c", "G", "pi", "inf", "const", "sys",
            "ppn", "in", "use", "check", "within", "yr", "deg", "Msun", "x", "\u03c9\u0307"]


def _mutate_text(rng: random.Random, text: str) -> str:
    """One mutation operator applied to the text of a sheet."""
    import re

    lines = text.split("\n")
    op = rng.randrange(14)
    if op == 0 and len(lines) > 1:          # delete a line
        del lines[rng.randrange(len(lines))]
    elif op == 1:                           # duplicate a line
        i = rng.randrange(len(lines))
        lines.insert(rng.randrange(len(lines) + 1), lines[i])
    elif op == 2 and len(lines) > 1:        # swap two lines
        i, j = rng.randrange(len(lines)), rng.randrange(len(lines))
        lines[i], lines[j] = lines[j], lines[i]
    elif op == 3:                           # flip an operator
        operators = list(re.finditer(r"\*\*|<=|>=|==|[-+*/^=<>\u00b1()\[\],.%]|\bin\b", text))
        if operators:
            m = rng.choice(operators)
            return text[:m.start()] + rng.choice(_OPERATORS) + text[m.end():]
    elif op == 4:                           # change a number
        numbers = list(re.finditer(r"\d[\d_.]*(?:e[-+]?\d+)?", text))
        if numbers:
            m = rng.choice(numbers)
            return text[:m.start()] + rng.choice(_NUMBER_SWAPS) + text[m.end():]
    elif op == 5:                           # truncate mid-token
        return text[:rng.randrange(len(text) + 1)]
    elif op == 6:                           # break brackets
        brackets = [i for i, ch in enumerate(text) if ch in "()[]"]
        if brackets:
            i = rng.choice(brackets)
            return text[:i] + rng.choice(["", "(", "[", ")", "]", "((", "]]"]) + text[i + 1:]
    elif op == 7:                           # rename a cell to a unit (or keyword) name
        defined = re.findall(r"^([^\W\d]\w*)\s*=", text, flags=re.M)
        if defined:
            old = rng.choice(defined)
            new = rng.choice(_RENAMES)
            if rng.random() < 0.5:
                return re.sub(rf"\b{re.escape(old)}\b", new, text)
            return re.sub(rf"^{re.escape(old)}\b", new, text, count=1, flags=re.M)
    elif op == 8:                           # line endings
        return text.replace("\n", rng.choice(ODD_BREAKS), rng.choice([1, 3, -1]))
    elif op == 9:                           # blanks before the end, no final newline
        return text.rstrip("\n") + " " * rng.choice([10, 24, 30, 40])
    elif op == 10:                          # insert a generated statement
        writer = _Writer(rng, re.findall(r"^([^\W\d]\w*)\s*=", text, flags=re.M))
        writer.namespaces["sys"] = ["M_star", "R_star", "orvane_b", "orvane_d", "J2_star"]
        i = rng.randrange(len(lines) + 1)
        lines.insert(i, writer.statement(i))
    elif op == 11:                          # drop or corrupt the markers
        if rng.random() < 0.5:
            return re.sub(r"#=[^\n]*", "", text)
        return re.sub(r"#= [^\n]*", rng.choice(["#= 1 km", "#= error: x", "#=", "#= (orbit)"]),
                      text, count=rng.randint(1, 5))
    elif op == 12:                          # a `use` line pointed elsewhere
        return text.replace('"orvane_system.sheet"',
                            rng.choice(['"missing.sheet"', '"main.sheet"', '"../x.sheet"',
                                        '"orvane_b.sheet"', '"lantern_pulsar.sheet"', '""']))
    else:                                   # indent or join lines
        i = rng.randrange(len(lines))
        if rng.random() < 0.5:
            lines[i] = rng.choice(["  ", "\t", "\u00a0"]) + lines[i]
        elif i + 1 < len(lines):
            lines[i:i + 2] = [lines[i] + " " + lines[i + 1]]
    return "\n".join(lines)


def _insert_garbage(rng: random.Random, data: bytes) -> bytes:
    at = rng.randrange(len(data) + 1)
    junk = rng.choice(GARBAGE) if rng.random() < 0.8 else bytes(
        rng.randrange(256) for _ in range(rng.randint(1, 8)))
    return data[:at] + junk + data[at:]


def _mutation_input(rng: random.Random) -> tuple[bytes, dict[str, bytes | None], list[str]]:
    import re

    demos = demo_sheets()
    name = rng.choice(sorted(demos))
    files: dict[str, bytes | None] = {}
    for other, data in demos.items():
        if other != name and (other == "orvane_system.sheet" or rng.random() < 0.2):
            files[other] = data
    target_is_import = name != "orvane_system.sheet" and rng.random() < 0.15
    data = demos["orvane_system.sheet"] if target_is_import else demos[name]
    text = data.decode("utf-8")
    for _ in range(rng.choice([1, 1, 2, 3, 4])):
        if rng.random() < 0.15:
            raw = _insert_garbage(rng, text.encode("utf-8", errors="surrogateescape"))
            text = raw.decode("utf-8", errors="surrogateescape")
        else:
            text = _mutate_text(rng, text)
    mutated = text.encode("utf-8", errors="surrogateescape")
    if target_is_import:
        files["orvane_system.sheet"] = mutated
        main = demos[name]
    else:
        main = mutated
    names = re.findall(r"^([^\W\d]\w*)\s*=", main.decode("utf-8", errors="replace"), flags=re.M)
    return main, files, names


# ---------------------------------------------------------------------------------------
# token soups

#: Samples of every terminal of grammar/sheet.lark (named and anonymous);
#: tests/test_fuzz.py checks that none is missing.
TERMINAL_SAMPLES: dict[str, list[str]] = {
    "NUMBER": PLAIN_NUMBERS + EXTREME_NUMBERS[:8],
    "PERCENT": PERCENTS,
    "NAME": NAMES + UNICODE_NAMES[:12] + list(FUNCTION_SIGNATURES)[:10] + ["AU", "km", "Msun"],
    "DOTTED_NAME": ["const.c", "sys.M_star", "a.b", "x.y.z", "budget.gr", "sys.orvane_b.a",
                    "const.G"],
    "STRING": ['"orvane_system.sheet"', '"lib.sheet"', '""', '"../a.sheet"', '"main.sheet"'],
    "HASH_TEXT": ["# note", "## heading", "#= 3 km", "#→ 3 km", "#", "# {0} {unit.__class__}",
                  "#=x"],
    "_NL": ["\n", "\r\n", "\n\n  ", "\n\t"],
    "_POW": ["^", "**"],
    "PM": ["\u00b1", "+/-"],
    "PERCENT_SIGN": ["%"],
    "MINUS": ["-", "\u2212"],
    "PLUS": ["+"],
    "LPAR": ["("], "RPAR": [")"], "LSQB": ["["], "RSQB": ["]"],
    "CONSTANTS": ["constants"], "PPN": ["ppn"], "CHECK": ["check"], "USE": ["use"],
    "AS": ["as"], "WITH": ["with"], "WITHIN": ["within"],
    "TABLE": ["table"], "PLOT": ["plot"], "VS": ["vs"], "SOLVE": ["solve"], "FOR": ["for"],
    "CORRELATION": ["correlation"], "COLON": [":"],
    "DATE": ["2031-04-12", "2031-04-12T06:30:00", "2016-12-31T23:59:60", "1959-01-01",
             "2031-13-40T25:61:99.5"],
    "EQEQ": ["=="], "LE": ["<="], "GE": [">="], "LT": ["<"], "GT": [">"],
    "_TIMES": ["*", "\u00d7", "\u00b7"],
    # anonymous terminals written as strings in the rules
    "EQUAL": ["="], "SLASH": ["/"], "COMMA": [","], "IN": ["in"],
}


def _soup_input(rng: random.Random) -> tuple[bytes, dict[str, bytes | None], list[str]]:
    kinds = list(TERMINAL_SAMPLES)
    pieces: list[str] = []
    if rng.random() < 0.5:
        pieces.append(rng.choice(NAMES) + " =")
    for _ in range(rng.randint(1, 60)):
        pieces.append(rng.choice(TERMINAL_SAMPLES[rng.choice(kinds)]))
    sep = rng.choice([" ", "", " ", "  "])
    text = sep.join(pieces)
    files: dict[str, bytes | None] = {}
    if "orvane_system" in text or rng.random() < 0.3:
        files["orvane_system.sheet"] = demo_sheets()["orvane_system.sheet"]
    if rng.random() < 0.3:
        files["lib.sheet"] = b"x = 1 km\ny = 2 x\n"
    data = text.encode("utf-8")
    if rng.random() < 0.1:
        data = _insert_garbage(rng, data)
    return data, files, [p.rstrip(" =") for p in pieces[:1] if p.endswith("=")]


# ---------------------------------------------------------------------------------------
# the prompt

def _repl_lines(rng: random.Random, names: list[str]) -> list[str]:
    writer = _Writer(rng, [n for n in names if n])
    lines: list[str] = []
    for _ in range(rng.randint(1, 7)):
        r = rng.random()
        if r < 0.3:
            lines.append(writer.expr(2) + (f" in {writer.unit_expr()}" if rng.random() < 0.2 else ""))
        elif r < 0.55:
            name = writer.some_cell() if rng.random() < 0.7 else writer.new_name()
            lines.append(f"{name} = {writer.expr(2)}")
        elif r < 0.6:
            lines.append(f"ppn {rng.choice(['gamma', 'beta', 'gama'])} = {writer.quantity('ppn')}")
        elif r < 0.72:
            command = rng.choice([":deps", ":users", ":revert"])
            lines.append(f"{command} {writer.some_cell()}")
        elif r < 0.97:
            lines.append(rng.choice(REPL_COMMANDS))
        else:
            lines.append(writer.check())
    if rng.random() < 0.5:
        lines.append(rng.choice([":save saved.sheet", ":write saved.sheet"]))
    return lines
