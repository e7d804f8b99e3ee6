"""The one place where wall-clock readings become instants.

All clock times are wall-clock times in the study's IANA zone unless the
value carries its own UTC offset (SLEEP_PARAMETERS.md, "Time, nights and
intervals"). The rules, the same for every reader:

- a wall time inside the spring-forward gap is read with the offset in force
  before the change (a clock that was not changed), and reported;
- a repeated autumn wall time is the first pass (fold=0) when read alone; in a
  series, the pass after the wall clock steps back is the second (fold=1);
- the noon rule: a clock time at or after 12:00 falls on the night's date,
  one before 12:00 on the next day (common practice, DESIGN.md);
- durations are elapsed time, so a night across a DST change is its real length.

``zones`` holds the zone look-ups, ``instants`` the conversions (one value and
whole columns), ``nights`` the noon rule.
"""

from .instants import GAP, REPEAT, localize, place_wall, wall_to_utc
from .nights import NOON, clock_on_night, elapsed_min, night_of, nights_of, noon_of, place_clock
from .zones import machine_timezone, pandas_tzinfo, zone

__all__ = [
    "GAP", "REPEAT", "NOON", "clock_on_night", "elapsed_min", "localize", "machine_timezone", "night_of",
    "nights_of", "noon_of", "pandas_tzinfo", "place_clock", "place_wall", "wall_to_utc", "zone",
]
