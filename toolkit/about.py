"""What lacuna says about itself: its version and the caution every output carries (imported by any module that
writes them; the package's ``__init__`` re-exports both)."""

__version__ = "0.1.0"

CAUTION = (
    "Results are for design exploration only. The FE model is linear-elastic, plane-stress and isotropic; "
    "it does not check strength, stability, connections or durability. Every member must be checked by a "
    "qualified engineer to the local design code before anything is made."
)
