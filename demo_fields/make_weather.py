"""Write the invented 30-year daily weather record of the demo farm (run once; committed).

The record is INVENTED: a small seeded stochastic generator (a two-state Markov
chain for wet and dry days, gamma-distributed amounts, smooth seasonal
temperatures with noise), not observations from any station. It gives a humid
climate with a wet spring, for demonstrating the season simulation only. PET
comes from the generated temperatures by Hargreaves-Samani at the latitude of
the invented farm (42.7 deg N). Snow and frozen soil are not represented.

    python demo_fields/make_weather.py
"""

from pathlib import Path

import numpy as np

from drainplan.weather import hargreaves_samani

HERE = Path(__file__).parent
SEED = 20261201
LATITUDE = 42.7                      # latitude of the invented demo farm
FIRST, LAST = "1995-01-01", "2024-12-31"


def main():
    rng = np.random.default_rng(SEED)
    dates = np.arange(np.datetime64(FIRST), np.datetime64(LAST) + 1)
    doy = (dates - dates.astype("datetime64[Y]")).astype(int) + 1
    phase = 2.0 * np.pi * (doy - 1) / 365.25
    # chance of rain after a dry / after a wet day: highest in spring (April-May)
    season = np.cos(phase - 2.2)
    p_dry = 0.27 + 0.08 * season
    p_wet = 0.50 + 0.08 * season
    mean_mm = 7.0 + 3.0 * np.cos(phase - 2.9)          # wetter storms in early summer
    wet = np.zeros(dates.size, bool)
    u = rng.random(dates.size)
    for i in range(dates.size):
        p = p_wet[i] if i and wet[i - 1] else p_dry[i]
        wet[i] = u[i] < p
    shape = 0.8
    amount = rng.gamma(shape, mean_mm / shape, dates.size)
    rain = np.where(wet, amount, 0.0)
    # a wet year now and then: scale a few years up
    years = dates.astype("datetime64[Y]").astype(int)
    factor = 1.0 + 0.18 * rng.standard_normal(years.max() - years.min() + 1)
    rain *= np.clip(factor[years - years.min()], 0.6, 1.5)
    tmax = 14.0 + 15.0 * np.sin(phase - 1.85) + 3.0 * rng.standard_normal(dates.size) \
        - 2.0 * wet
    tmin = tmax - np.clip(10.0 + 2.0 * rng.standard_normal(dates.size) - 3.0 * wet, 2.0, None)
    pet = hargreaves_samani(tmin=tmin, tmax=tmax, latitude=LATITUDE, day_of_year=doy) * 1000.0
    lines = ["# INVENTED weather record for the invented Willow Run demo farm: made by",
             "# demo_fields/make_weather.py (seeded generator), not observations.",
             f"# PET by Hargreaves-Samani (FAO-56 Eq. 52) at latitude {LATITUDE} deg N.",
             "date,rain_mm,pet_mm"]
    lines += [f"{d},{r:.1f},{p:.1f}" for d, r, p in zip(dates, rain, pet)]
    (HERE / "weather.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    print(f"{dates.size} days, rain {rain.sum() / 30:.0f} mm/yr, PET {pet.sum() / 30:.0f} mm/yr")


if __name__ == "__main__":
    main()
