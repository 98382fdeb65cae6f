"""``planner serve``: a local what-if page that re-plans as you move a number (Starlette on uvicorn).

:mod:`.app` holds the ASGI app and the API, :mod:`.page` the page built from the scenario; the
command itself is :mod:`planner.cli.serve`.
"""
