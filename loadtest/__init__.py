"""The load test: many people at once on gunicorn, and no acknowledged edit lost.

It lives outside the app package (it is a tool that drives the app, not part of it) and
runs as ``python -m loadtest --users 16 --seconds 15 --requests 40`` from the repository's
root with the app's settings; ``.ci/run`` runs it against PostgreSQL.
"""
