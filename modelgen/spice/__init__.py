"""The simulator side: the SPICE diode equations, and runs of real simulators.

- :mod:`modelgen.spice.evaluator`: what ngspice and gnucap compute from a card.
- :mod:`modelgen.spice.ngspice`, :mod:`modelgen.spice.gnucap`: batch runners.
- :mod:`modelgen.spice.check`: run cards in the simulators and compare.
"""
