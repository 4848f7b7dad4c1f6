"""Templates of ``gammadot new-plugin``: a plugin package per kind (``string.Template`` files).

Each kind has ``<kind>.py.tmpl`` (the plugin module) and ``<kind>_test.py.tmpl`` (its test,
which runs a study through the real pipeline with the ``gammadot_study`` fixture);
``pyproject.toml.tmpl`` and ``README.md.tmpl`` are shared. Placeholders: ``$dist``
(distribution name), ``$module`` (module and entry-point name), ``$id`` (record id),
``$title``, ``$kind``, ``$hookspec`` (the supported hook-spec range), ``$requires``
(the gammadot requirement).
"""
