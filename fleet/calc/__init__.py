"""Holdfast's computation core: pure functions on SI-named numbers, no Django, no I/O.

Modules:

- ``seawater``: pressure <-> depth, density and sound speed (TEOS-10 via gsw), UNESCO 1983
  depth, Mackenzie sound speed, pressure units.
- ``rtd``: IEC 60751 platinum resistance thermometers (Callendar-Van Dusen, tolerances).
- ``anodes``: DNV-RP-B401 (2010) sacrificial anode design, resistance and wear fitting.
- ``seals``: AS568 O-ring sizes, gland squeeze/stretch/fill, shelf life, seal due dates.
- ``battery``: primary cell chemistries, usable capacity, Arrhenius self-discharge,
  consumption, days left.
- ``pressure``: proof test pressure, pressure-hold verdicts, test plausibility.
- ``buoyancy``: net buoyancy, recovery margin and recovery buoyancy at the lightest water,
  ascent speed.
- ``ranging``: slant range and turnaround, reply timing, absorption, the reply sonar
  equation.
- ``exposure``: cumulative immersed days from deployment intervals.

Every out-of-domain argument raises ``ValueError`` naming the argument and its range
(helpers in ``_checks``); ranges a form must respect are module constants ending in
``_RANGE_<unit>`` as ``(lo, hi)`` tuples.
"""
