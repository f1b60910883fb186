"""Write the demo's detector readings: sample_records/detectors/DE-LEJ-readings.csv.

Invented data for the demo only (deterministic, seed fixed). Three channels of the Leipzig
store, every 5 minutes from 2026-10-05 to 2026-11-25, wide form with explicit UTC offsets:

* CR-DAIRY watches CU-DAIRY (dairy cold room, R-452A). From 12 October a small leak builds up
  overnight while the room is closed and clears when the doors open in the morning; it grows
  week by week. The day check on 19 October finds nothing; the leak is found on 3 November and
  repaired on 5 November. Quiet for a week, then night-time readings rise again.
* CR-MEAT is the next cold room; it sees a fraction of the same gas (the rooms share a
  corridor), so its readings move with CR-DAIRY.
* MR-RACK watches RACK-1 in the plant room: a brief rise at each 6-hourly defrost, nothing
  else. A six-hour outage of the detector on 28 October leaves a gap.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

OUT = Path(__file__).resolve().parents[1] / "sample_records" / "detectors"
ZONE = "Europe/Berlin"


def main() -> None:
    rng = np.random.default_rng(20261005)
    times = pd.date_range("2026-10-05 00:00", "2026-11-25 23:55", freq="5min", tz=ZONE)
    local_hour = times.hour + times.minute / 60
    day = (times.normalize() - times[0].normalize()).days.to_numpy()
    # Night build-up: rises from 20:00 (doors shut) to a peak before 06:00, gone by 07:00.
    since_close = np.where(local_hour >= 20, local_hour - 20, np.where(local_hour < 7, local_hour + 4, -1.0))
    shape = np.clip(since_close / 10, 0, 1) ** 1.5 * (local_hour < 6.5) + np.where(
        (local_hour >= 6.5) & (local_hour < 7), 0.3, 0
    )
    shape = np.where(since_close < 0, 0, shape)
    date = times.tz_convert(ZONE).date
    leak_start, found, repaired, returns = (
        pd.Timestamp(d).date() for d in ("2026-10-12", "2026-11-03", "2026-11-05", "2026-11-12")
    )
    strength = np.zeros(len(times))
    active = (date >= leak_start) & (date < repaired)
    strength[active] = 60 + 6.0 * (day[active] - day[np.argmax(active)])  # grows ~6 ppm a night
    back = date >= returns
    strength[back] = 40 + 5.0 * (day[back] - day[np.argmax(back)])
    defrost8 = 6 * np.exp(-(((local_hour % 8) - 0.5) ** 2) / 0.1)  # the unit's 8-hour defrost
    dairy = 3 + strength * shape + defrost8 + rng.normal(0, 1.5, len(times))
    meat = 2 + 0.45 * strength * shape + rng.normal(0, 1.5, len(times))
    defrost6 = 32 * np.exp(-(((local_hour % 6) - 0.4) ** 2) / 0.05)
    rack = 4 + defrost6 + rng.normal(0, 1.2, len(times))
    frame = pd.DataFrame(
        {
            "time": times.map(lambda t: t.isoformat()),
            "CR-DAIRY": np.clip(dairy, 0, None).round(1),
            "CR-MEAT": np.clip(meat, 0, None).round(1),
            "MR-RACK": np.clip(rack, 0, None).round(1),
        }
    )
    outage = (times >= pd.Timestamp("2026-10-28 09:00", tz=ZONE)) & (times < pd.Timestamp("2026-10-28 15:00", tz=ZONE))
    frame = frame[~outage]
    assert found < repaired
    OUT.mkdir(parents=True, exist_ok=True)
    frame.to_csv(OUT / "DE-LEJ-readings.csv", index=False, lineterminator="\n")
    (OUT / "channels.csv").write_text(
        "site,channel,system,levels,night\nDE-LEJ,CR-DAIRY,DE-LEJ/CU-DAIRY,25,100,400,22:00-06:00\n".replace(
            "25,100,400", '"25,100,400"'
        )
        + 'DE-LEJ,CR-MEAT,DE-LEJ/CU-DAIRY,"25,100,400",22:00-06:00\n'
        + 'DE-LEJ,MR-RACK,DE-LEJ/RACK-1,"25,100,400",22:00-06:00\n',
        encoding="utf-8",
    )


if __name__ == "__main__":
    main()
