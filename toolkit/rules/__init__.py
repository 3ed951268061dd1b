"""rules stage: fabrication profiles (data files with sources) and the geometric proof (see docs/rules.md).

- ``profiles``: ``list_profiles()``, ``load_profile(name)``, ``rules_for(profile, overrides)`` -> Rules,
  ``profiles_table()`` / ``profiles_text()`` for ``lacuna profiles``.
- ``check``: ``check_layout(panel, voids, rules)`` -> [Violation], ``allowed_region(panel, rules)``,
  ``impossible_rules(panel, rules)``.
"""

from .check import TOLERANCE_MM, Violation, allowed_region, check_layout, impossible_rules
from .profiles import (
    Profile,
    list_profiles,
    load_profile,
    profiles_table,
    profiles_text,
    rules_for,
)

__all__ = [
    "TOLERANCE_MM",
    "Profile",
    "Violation",
    "allowed_region",
    "check_layout",
    "impossible_rules",
    "list_profiles",
    "load_profile",
    "profiles_table",
    "profiles_text",
    "rules_for",
]
