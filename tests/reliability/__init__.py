"""The reliability suite (`make reliability`, issue 13): hostile inputs, kills, unplugs, floods and a soak.

Each part is a module with `run(quick: bool) -> list[Figure]`; `run.py` prints them as one table and exits
non-zero when any figure is out of bounds. `test_quick.py` runs every part with `quick=True` inside
`make test`, so the suite cannot rot.
"""
