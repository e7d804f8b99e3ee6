"""Widgets of the terminal interface: app bar, night timeline, Bland–Altman scatter."""
