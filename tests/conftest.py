import sys
from pathlib import Path

# Let tests import the small shared helpers that live beside them (tests/sales_factory.py).
sys.path.insert(0, str(Path(__file__).parent))
