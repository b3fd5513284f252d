"""Screens and modals of the lotwatch terminal interface, one module each."""
