"""Widgets of the lotwatch terminal interface; they show results and never compute them."""
