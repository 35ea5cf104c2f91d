"""drivespan's Streamlit dashboard: fleet ranking, unit detail, upload, settings, plan.

Launch it with :func:`dashboards.launch.run` (or ``drivespan dashboard``).
"""
