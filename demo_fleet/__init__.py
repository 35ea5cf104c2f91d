"""The invented drivespan demo fleet and its seeded generator (see README.md).

Use ``from demo_fleet.generate import generate, GeneratedFleet`` or run
``python -m demo_fleet.generate OUT_DIR``.
"""
