"""lacuna: lighten structural panels drawn in DXF.

Results are for design exploration; every member must be checked by a qualified engineer to the local code.
"""

__version__ = "0.1.0"
