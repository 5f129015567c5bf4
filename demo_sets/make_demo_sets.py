"""Write labbench's three demo tables. THE DATA IS INVENTED: no orchard, no bakery and no pump
was measured.

All three scenarios are made up for this project to show the workbench on tables with realistic mess
(a categorical column, a few missing values, features on very different scales, an id column to
ignore, noise). The numbers follow simple made-up rules, written out below, so that a small
network has something non-linear to find.

* ``orchard.csv`` (multiclass): the ``grade`` of an apple crate ("premium", "standard", "juice")
  from its measurements. A crate is premium when its apples are picked inside the variety's
  ripeness window, sweet enough for the variety, in the right size band and not bruised; juice
  when they are soft, bruised or far past the window; standard otherwise (then 2 % of the labels
  are flipped, as graders disagree).
* ``bakery.csv`` (regression): ``loaves_sold`` per day from weather, calendar, price and the
  town-centre footfall counter. Sales scale with footfall, peak at mild temperatures, fall with
  rain and price (elasticity about -1.3), differ by weekday, drop on public holidays, rise on
  promotion days, with multiplicative noise.
* ``pumps.csv`` (no target: for the map and group families): readings of the centrifugal pumps
  of an imagined water works, each taken while the pump was in one of four operating states that
  the ``state`` column names ("steady", "cavitating", "worn bearing", "blocked inlet") - shown
  beside the groups a map finds, never learnt from. Each state shifts the flow, head, vibration,
  bearing temperature and noise in its own way (table ``PUMP_STATES``); the motor current follows
  the hydraulic power (flow × head) plus noise; 1 % of the bearing temperatures are missing.

Run ``python demo_sets/make_demo_sets.py [OUT_DIR]`` (default: this folder). The output depends
only on the fixed seeds below: a rerun writes byte-identical files.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pandas as pd

ORCHARD_SEED = 20240917
BAKERY_SEED = 20240918
PUMPS_SEED = 20261202
ORCHARD_ROWS = 1500
BAKERY_ROWS = 1200
PUMPS_ROWS = 1000

# variety: (days from bloom to the best picking day, sugar (deg Brix) a premium crate needs,
#           typical diameter in mm)
VARIETIES = {
    "Gala": (135, 12.5, 72.0),
    "Cox": (145, 13.0, 68.0),
    "Fuji": (175, 14.5, 78.0),
    "Braeburn": (165, 12.0, 75.0),
}
BLOCKS = ["north", "south", "river", "hill"]


def _with_gaps(rng: np.random.Generator, values: np.ndarray, fraction: float) -> np.ndarray:
    out = values.astype(np.float64).copy()
    out[rng.random(len(out)) < fraction] = np.nan
    return out


def make_orchard(seed: int = ORCHARD_SEED, n: int = ORCHARD_ROWS) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    variety = rng.choice(list(VARIETIES), n, p=[0.35, 0.2, 0.25, 0.2])
    best_day, sugar_needed, size = (np.array([VARIETIES[v][i] for v in variety]) for i in range(3))
    block = rng.choice(BLOCKS, n, p=[0.3, 0.3, 0.25, 0.15])
    light = np.where(block == "south", 62000.0, np.where(block == "hill", 55000.0, 45000.0))
    light = light + rng.normal(0, 9000, n)                              # canopy light, lux
    days = np.round(best_day + rng.normal(0, 14, n))                    # days since bloom
    late = days - best_day
    sugar = sugar_needed + 0.6 + 0.03 * late + (light - 50000) / 12000 + rng.normal(0, 1.1, n)
    firmness = 7.6 - 0.045 * late - 0.0012 * late**2 + rng.normal(0, 0.55, n)   # kg/cm2
    diameter = size + rng.normal(0, 6.5, n) + (light - 50000) / 9000    # mm
    weight = 0.00047 * diameter**3 * rng.normal(1.0, 0.05, n)           # g
    bruises = rng.poisson(0.25 + 0.04 * np.clip(late, 0, None), n)      # bruised apples in a sample of 20
    starch = np.clip(np.round(5 + late / 6 + rng.normal(0, 1.0, n)), 1, 10)   # starch-iodine index 1-10

    quality = (1.1 * (sugar - sugar_needed)
               - (late / 11.0) ** 2
               - ((diameter - size - 2.0) / 7.0) ** 2
               - 1.3 * bruises
               + rng.normal(0, 0.3, n))
    defect = (firmness < 6.5) | (bruises >= 3) | (late > 22) | (diameter < size - 12)
    grade = np.where(defect, "juice", np.where(quality > -0.5, "premium", "standard"))
    flip = rng.random(n) < 0.02
    grade = np.where(flip, rng.choice(["premium", "standard", "juice"], n), grade)

    frame = pd.DataFrame({
        "crate_id": [f"CR-{i:05d}" for i in range(1, n + 1)],
        "variety": variety,
        "block": block,
        "days_since_bloom": days.astype(np.int64),
        "sugar_brix": np.round(_with_gaps(rng, sugar, 0.03), 1),
        "firmness_kg_cm2": np.round(_with_gaps(rng, firmness, 0.02), 2),
        "diameter_mm": np.round(diameter, 1),
        "weight_g": np.round(weight, 1),
        "starch_index": starch.astype(np.int64),
        "bruised_of_20": bruises.astype(np.int64),
        "canopy_light_lux": pd.Series(np.round(_with_gaps(rng, light, 0.04), -1)).astype("Int64"),
        "grade": grade,
    })
    return frame


WEEKDAYS = ["Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun"]
WEEKDAY_FACTOR = np.array([0.85, 0.9, 0.95, 0.95, 1.1, 1.45, 0.7])


def make_bakery(seed: int = BAKERY_SEED, n: int = BAKERY_ROWS) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    dates = pd.date_range("2021-03-01", periods=n, freq="D")
    doy = dates.day_of_year.to_numpy()
    wd = dates.day_of_week.to_numpy()
    temperature = 11 + 9 * np.sin(2 * np.pi * (doy - 110) / 365.25) + rng.normal(0, 3.5, n)
    rain = np.where(rng.random(n) < 0.45, rng.gamma(1.2, 5.0, n), 0.0)
    holiday = (rng.random(n) < 0.03).astype(np.int64)
    promo = (rng.random(n) < 0.12).astype(np.int64)
    # price steps up twice over the years, with small weekly specials
    price = 2.40 + 0.25 * (np.arange(n) > 400) + 0.30 * (np.arange(n) > 850) - 0.20 * promo
    price = price + rng.choice([0.0, 0.0, 0.0, -0.10, 0.10], n)
    footfall = (14000 * (0.8 + 0.3 * WEEKDAY_FACTOR[wd]) * (1 + 0.15 * np.sin(2 * np.pi * (doy - 150) / 365.25))
                * np.exp(-rain / 40) * rng.normal(1.0, 0.08, n))

    expected = (0.021 * footfall * WEEKDAY_FACTOR[wd]
                * np.exp(-((temperature - 17.0) / 16.0) ** 2)
                * np.exp(-rain / 9.0) * (0.7 + 0.3 * np.exp(-rain / 30.0)) / (0.7 + 0.3)
                * (price / 2.6) ** -1.3
                * np.where(holiday == 1, 0.55, 1.0)
                * np.where(promo == 1, 1.15, 1.0))
    sold = np.round(expected * rng.lognormal(0.0, 0.07, n))

    return pd.DataFrame({
        "day_id": [f"D{i:04d}" for i in range(1, n + 1)],
        "date": dates.strftime("%Y-%m-%d"),
        "weekday": np.array(WEEKDAYS)[wd],
        "public_holiday": holiday,
        "promotion": promo,
        "temperature_c": np.round(_with_gaps(rng, temperature, 0.02), 1),
        "rain_mm": np.round(_with_gaps(rng, rain, 0.03), 1),
        "price_eur": np.round(price, 2),
        "footfall": pd.Series(np.round(_with_gaps(rng, footfall, 0.025))).astype("Int64"),
        "loaves_sold": sold.astype(np.int64),
    })


# state: (share of the readings, flow m3/h, head m, vibration mm/s, bearing temperature degC,
#         noise dB(A)); each as (mean, spread) except the share
PUMP_STATES = {
    "steady": (0.55, (120, 8), (32, 1.5), (2.0, 0.4), (55, 2.5), (78, 1.5)),
    "cavitating": (0.15, (104, 10), (25, 2.5), (5.5, 0.9), (58, 2.5), (89, 2.5)),
    "worn bearing": (0.15, (118, 8), (31, 1.5), (7.5, 1.0), (73, 3.5), (84, 2.0)),
    "blocked inlet": (0.15, (72, 9), (37, 2.0), (3.4, 0.6), (63, 3.0), (80, 2.0)),
}


def make_pumps(seed: int = PUMPS_SEED, n: int = PUMPS_ROWS) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    names = list(PUMP_STATES)
    state = rng.choice(names, n, p=[PUMP_STATES[s][0] for s in names])

    def draw(i: int) -> np.ndarray:
        mean = np.array([PUMP_STATES[s][i][0] for s in state], dtype=np.float64)
        spread = np.array([PUMP_STATES[s][i][1] for s in state], dtype=np.float64)
        return mean + spread * rng.normal(size=n)

    flow, head, vibration, temperature, noise = (draw(i) for i in range(1, 6))
    current = 0.0118 * flow * head + rng.normal(0, 1.5, n)          # amperes: hydraulic power
    return pd.DataFrame({
        "reading_id": [f"R{i:04d}" for i in range(1, n + 1)],
        "flow_m3h": np.round(flow, 1),
        "head_m": np.round(head, 2),
        "vibration_mm_s": np.round(np.abs(vibration), 2),
        "bearing_temp_c": np.round(_with_gaps(rng, temperature, 0.01), 1),
        "motor_current_a": np.round(current, 1),
        "noise_db": np.round(noise, 1),
        "state": state,
    })


def write(frame: pd.DataFrame, path: Path) -> None:
    # plain CSV: header row, comma separated, empty cells for missing values, "\n" line ends
    text = frame.to_csv(index=False, lineterminator="\n", na_rep="")
    path.write_bytes(text.encode("utf-8"))


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    out = Path(args[0]) if args else Path(__file__).resolve().parent
    out.mkdir(parents=True, exist_ok=True)
    write(make_orchard(), out / "orchard.csv")
    write(make_bakery(), out / "bakery.csv")
    write(make_pumps(), out / "pumps.csv")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
