"""lacuna: lighten structural panels drawn in DXF.

Results are for design exploration; every member must be checked by a qualified engineer to the local code.
"""

__version__ = "0.1.0"

CAUTION = (
    "Results are for design exploration only. The FE model is linear-elastic, plane-stress and isotropic; "
    "it does not check strength, stability, connections or durability. Every member must be checked by a "
    "qualified engineer to the local design code before anything is made."
)


def optimize_document(doc, job, **options):
    """The whole job on an in-memory ezdxf document; adds the result layers in place (see docs/api.md)."""
    from .api import optimize_document as _run

    return _run(doc, job, **options)
