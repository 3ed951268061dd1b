"""lacuna: lighten structural panels drawn in DXF.

Results are for design exploration; every member must be checked by a qualified engineer to the local code.
"""

from .about import CAUTION, __version__

__all__ = ["CAUTION", "__version__", "optimize_document"]


def optimize_document(doc, job, **options):
    """The whole job on an in-memory ezdxf document; adds the result layers in place (see docs/api.md)."""
    from .api import optimize_document as _run

    return _run(doc, job, **options)
