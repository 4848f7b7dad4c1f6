"""JSON Schemas of gammadot's own file formats, shipped as package data.

``run-v1.json``: the run document (one or many flow-curve runs, every quantity with its
unit), read by the ``json_runs`` importer and written by ``gammadot export --json``. Load it
with :func:`gammadot.run_json.load_schema`; ``gammadot schema`` prints it.
"""
