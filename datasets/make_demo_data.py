"""Regenerate the bundled demo files from tdakit's invented scenarios (fixed seeds).

Run from the repository root:  python datasets/make_demo_data.py
"""

from pathlib import Path

import numpy as np

from tdakit.scenarios import marrowfield_halos, tidewater_readings

HERE = Path(__file__).resolve().parent


def main() -> None:
    positions, masses = marrowfield_halos(12_000, rng=2026)
    table = np.column_stack((positions, masses))
    np.savetxt(HERE / "marrowfield_halos.csv", table, delimiter=",", fmt="%.5f",
               header="x,y,z,mass", comments="")
    readings, is_glitch = tidewater_readings(4_000, rng=2026)
    np.savez_compressed(HERE / "tidewater_readings.npz", points=readings, is_glitch=is_glitch)
    print(f"wrote {len(table)} halos and {len(readings)} readings ({int(is_glitch.sum())} glitches)")


if __name__ == "__main__":
    main()
