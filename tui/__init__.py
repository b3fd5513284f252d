"""lotwatch's command line and Textual terminal interface (drives ``store`` and ``stats``)."""

# One version for the whole program: the store records it in every file it writes.
from lotwatch.store.schema import LOTWATCH_VERSION as __version__

__all__ = ["__version__"]
