import sys
from pathlib import Path

# tests/drawings.py and tests/group_codes.py are helpers the tests import by name.
sys.path.insert(0, str(Path(__file__).resolve().parent))
