"""Material models. Each material is a module with the same functions.

To add a material, write a module beside :mod:`modelgen.materials.silicon`
with the same function names and constants, and list it in :data:`MATERIALS`.
"""

from . import silicon

#: Known materials by the name a device description uses.
MATERIALS = {silicon.NAME: silicon}


def get(name):
    """The material module called ``name``; KeyError if unknown."""
    return MATERIALS[name]
