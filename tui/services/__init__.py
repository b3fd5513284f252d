"""Headless services: the only code that joins ``store`` and ``stats``. No Textual, no click."""
