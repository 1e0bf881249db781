"""Headless front ends: output writers (JSON Lines, rich or plain lines), opening ports, the run loop.

Nothing here builds the Textual app; it all works over SSH, in a pipe or from a script.
"""
