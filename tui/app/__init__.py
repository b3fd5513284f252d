"""The Textual terminal interface: application, screens, widgets and messages."""
