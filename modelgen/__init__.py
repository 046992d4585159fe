"""modelgen: SPICE diode model cards from the physics of a pn junction.

The Python API is the one the command line uses:

>>> from modelgen import description, extraction, cards
>>> device = description.load("examples/switching_diode.toml")   # doctest: +SKIP
>>> result = extraction.derive(device)                            # doctest: +SKIP
>>> print(cards.card(result, 0))                                  # doctest: +SKIP
"""

__version__ = "0.1.0"
