"""Widgets of the bench notebook: the waveform plot, the checklist list, the soak view."""
