"""Certification: witness operators and their local settings, repetition counts and lab time."""
