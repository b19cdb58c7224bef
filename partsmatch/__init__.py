"""partsmatch: stress-aware substitution of high-voltage capacitors, diodes and fuses.

Importing this package stays light: no numpy, scipy, matplotlib or pint at import time.
"""

__version__ = "0.1.0"
