"""Events to meaning: the integer detector (ALGORITHM.md), measures, groups, sliders, suggestions, profiles.

Pure cores with no I/O except the profile and export files; never imports `tui`.
"""
