"""The solve engine: every HiGHS model the planner builds, behind one object."""
