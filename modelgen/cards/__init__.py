"""Model-card text: one renderer, number formatting, safe comments, JSON documents.

- :mod:`modelgen.cards.text`: numbers in exponent form, safe comment lines.
- :mod:`modelgen.cards.render`: the one renderer (a single card is a library
  of one), over the targets of :mod:`modelgen.targets`.
- :mod:`modelgen.cards.documents`: plain-data documents for JSON output.
- :mod:`modelgen.cards.reader`: cards and libraries read back into numbers.

Templates hold no logic beyond loops: every number arrives formatted and
every comment arrives as a safe line.
"""

from __future__ import annotations

from . import reader
from .documents import as_json, as_json_list, derived_units, dumps, json_safe, row_document
from .render import (CAUTION, Part, card, card_columns, card_values, file_header, left_out_names, library,
                     part_cards, render, table_cards, table_library)
from .text import CONTROL, comment_lines, format_number, format_numbers, safe, take


__all__ = ["reader", "CAUTION", "CONTROL", "Part", "as_json", "as_json_list", "card", "card_columns",
           "card_values", "comment_lines", "derived_units", "dumps", "file_header", "format_number",
           "format_numbers", "json_safe", "left_out_names", "library", "part_cards", "render", "row_document",
           "safe", "table_cards", "table_library", "take"]
