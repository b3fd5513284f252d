"""Rendering of results as text, Markdown and HTML; one sanitizer and one number formatter. No Textual, no click."""
