"""The demo bakery's crumb score as a function of oven temperature and proving time.

Invented for the demo, like the bakery itself: no real oven, loaf or measurement. It stands for
the real response the bakery would meet, so that ``workbench transfer studies/demo.toml`` can
show whether the setting chosen in simulation also does well there. The score peaks at 9.2
near 233 °C and 95 minutes; hotter ovens want shorter proving; loaves far from the peak are
inedible and all score 0.5 (a flat failing region, as real responses have).
"""

import math


def crumb_score(temperature: float, proving: float) -> float:
    """Crumb score (0-10, higher is better) of a loaf baked at ``temperature`` (°C) after
    ``proving`` minutes of proving."""
    heat = (temperature - 233.0) / 17.0
    proof = (math.log(proving / 95.0) + 0.004 * (temperature - 233.0)) / 0.5
    return max(9.2 - heat**2 - proof**2, 0.5)
