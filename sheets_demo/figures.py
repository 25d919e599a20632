"""Draw the README's figures from the demo sheets, or check that they are current.

    python sheets_demo/figures.py           # write sheets_demo/figures/*.png and the digests
    python sheets_demo/figures.py --check   # exit 1 if a sheet's plot no longer matches them

A figure is current when the numbers it was drawn from (each plot's values, σ, units and
labels, to 6 significant digits) still hash to the digest written beside it; the PNG bytes
themselves depend on the matplotlib version, the numbers do not.
"""

from __future__ import annotations

import hashlib
import json
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
FIGURES = HERE / "figures"
DIGESTS = FIGURES / "digests.json"
#: (sheet, plot name) of every figure the README shows
SHOWN = [("tern_pass.sheet", "delay_vs_days"), ("tern_pass.sheet", "doppler_vs_days")]


def _digest(spec) -> str:
    parts = [spec.name, spec.heading, str(spec.log_x), str(spec.log_y)]
    for series in (*spec.x, *spec.y):
        parts += [series.label, *(f"{v:.6g}" for v in series.values.ravel())]
        if series.sigma is not None:
            parts += [f"{v:.6g}" for v in series.sigma.ravel()]
    return hashlib.sha256("\n".join(parts).encode()).hexdigest()[:16]


def _specs():
    from calc import Sheet

    sheets: dict[str, object] = {}
    for sheet_name, plot_name in SHOWN:
        if sheet_name not in sheets:
            sheets[sheet_name] = Sheet.load(HERE / sheet_name)
        sheet = sheets[sheet_name]
        spec = next((p for p in sheet.plots() if p.name == plot_name), None)  # type: ignore[attr-defined]
        if spec is None:
            raise SystemExit(f"{sheet_name} has no plot `{plot_name}`")
        yield plot_name, spec


def main(argv: list[str]) -> int:
    if "--check" in argv:
        recorded = json.loads(DIGESTS.read_text()) if DIGESTS.exists() else {}
        stale = [name for name, spec in _specs() if recorded.get(name) != _digest(spec)
                 or not (FIGURES / f"{name}.png").exists()]
        for name in stale:
            print(f"sheets_demo/figures/{name}.png is stale: run python sheets_demo/figures.py")
        if not stale:
            print("README figures: up to date")
        return 1 if stale else 0
    from calc.files import atomic_write
    from calc.outputs.plot import write_plots

    FIGURES.mkdir(exist_ok=True)
    digests = {}
    for name, spec in _specs():
        write_plots([spec], FIGURES, "png")
        digests[name] = _digest(spec)
    atomic_write(DIGESTS, (json.dumps(digests, indent=2) + "\n").encode())
    print(f"wrote {len(digests)} figures to {FIGURES}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
