import sys
from pathlib import Path

from hypothesis import settings

# tests/drawings.py and tests/group_codes.py are helpers the tests import by name.
sys.path.insert(0, str(Path(__file__).resolve().parent))

# The default run is reproducible: the same examples every time, so CI cannot fail on a lucky draw. To search
# afresh (as the long runs should): pytest --hypothesis-profile=explore -m slow
settings.register_profile("repeatable", derandomize=True, database=None)
settings.register_profile("explore", derandomize=False)
settings.load_profile("repeatable")
