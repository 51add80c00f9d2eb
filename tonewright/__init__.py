"""tonewright: design, tune and document tuned percussion bars, tubes and strings.

The numerics live in the top-level packages ``forward`` (eigen-models) and ``optimizer``
(inverse design); this package holds file formats, the command line and shop-floor tools.
"""

__version__ = "0.1.0"
