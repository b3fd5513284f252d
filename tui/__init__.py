"""lotwatch's command line and Textual terminal interface (drives ``store`` and ``stats``)."""

__version__ = "0.1.0"
