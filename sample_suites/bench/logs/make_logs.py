"""Write the recorded bench logs of the sample suite (invented data; run once, output kept)."""

from __future__ import annotations

from pathlib import Path

import numpy as np

HERE = Path(__file__).parent


def main() -> None:
    rng = np.random.default_rng(20261201)
    # Unit 0417: heater plate soak, one reading per half second, sits near 85.1 degC.
    plate = 85.1 + rng.normal(0.0, 0.06, 40)
    ambient = 21.3 + rng.normal(0.0, 0.05, 40)
    lines = [
        "# Heron VD-2 end-of-line bench, station 3: heater plate soak",
        "# unit 0417, thermocouple reader TR-2 on channel B",
        "elapsed_s,plate_degC,ambient_degC",
    ]
    for i, (p, a) in enumerate(zip(plate, ambient, strict=True)):
        if i == 20:
            lines.append("# door opened for 5 s here; readings continue")
        lines.append(f"{0.5 * (i + 1):.1f},{p:.3f},{a:.2f}")
    (HERE / "plate_soak_unit0417.csv").write_text("\n".join(lines) + "\n")

    # Unit 0417: 5 V rail under load, whitespace-separated, no header.
    rail = 4.962 + rng.normal(0.0, 0.006, 30)
    lines = ["# Heron VD-2, unit 0417, 5 V rail under full valve load", "# time_s volts"]
    lines += [f"{0.2 * (i + 1):6.1f}  {v:.4f}" for i, v in enumerate(rail)]
    (HERE / "rail_5v_unit0417.txt").write_text("\n".join(lines) + "\n")

    # Unit 0388: loop output at the 12 mA setpoint, drifted high (a failing unit).
    loop = 12.065 + rng.normal(0.0, 0.005, 25)
    lines = ["# Heron VD-2, unit 0388, loop output at 12 mA setpoint", "sample,loop_mA"]
    lines += [f"{i + 1},{v:.4f}" for i, v in enumerate(loop)]
    (HERE / "loop_unit0388.csv").write_text("\n".join(lines) + "\n")


if __name__ == "__main__":
    main()
