"""Write an invented catalogue of stars as seen from Orvane d, for `orvane_catalogue.sheet`.

    python sheets_demo/make_orvane_catalogue.py [--stars 1000000] [--files 8] [-o data/orvane_catalogue]

Every star is made up: directions uniform on the sky, magnitudes from an exponential count.
Each row gives the star's elongation from Orvane and from its giant planet Orvane e as seen
from the home world Orvane d at the sheet's epoch (the planet is placed 40° from the star on
the sky; the elongation from it follows from spherical trigonometry). The folder of Parquet
files it writes is not part of the repository (a million stars are some 30 MB).
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

#: the angle between the directions to Orvane and to Orvane e at the epoch (invented)
STAR_TO_PLANET_DEG = 40.0


def catalogue(stars: int, seed: int) -> pa.Table:
    rng = np.random.default_rng(seed)
    # directions uniform on the sphere, Orvane at the pole: cos(elongation) uniform in [-1, 1]
    cos_star = rng.uniform(-1.0, 1.0, stars)
    azimuth = rng.uniform(0.0, 2 * np.pi, stars)
    elong_star = np.degrees(np.arccos(cos_star))
    # the planet at elongation STAR_TO_PLANET_DEG from Orvane, azimuth 0
    p = np.radians(STAR_TO_PLANET_DEG)
    sin_star = np.sqrt(1.0 - cos_star**2)
    cos_planet = cos_star * np.cos(p) + sin_star * np.sin(p) * np.cos(azimuth)
    elong_planet = np.degrees(np.arccos(np.clip(cos_planet, -1.0, 1.0)))
    mag = 6.0 + rng.exponential(2.5, stars)
    return pa.table({"elong_star [deg]": elong_star, "elong_planet [deg]": elong_planet,
                     "mag []": mag})


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--stars", type=int, default=1_000_000)
    parser.add_argument("--files", type=int, default=8, help="Parquet files in the folder")
    parser.add_argument("--seed", type=int, default=2031)
    parser.add_argument("-o", dest="output", default="data/orvane_catalogue")
    args = parser.parse_args()
    folder = Path(args.output)
    folder.mkdir(parents=True, exist_ok=True)
    table = catalogue(args.stars, args.seed)
    per_file = -(-args.stars // args.files)
    for index in range(args.files):
        part = table.slice(index * per_file, per_file)
        if part.num_rows:
            pq.write_table(part, folder / f"part{index:03d}.parquet", row_group_size=100_000)
    print(f"{args.stars:,} stars in {folder}/")


if __name__ == "__main__":
    main()
