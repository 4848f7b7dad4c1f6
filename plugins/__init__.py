"""gammadot's built-in plugins, registered exactly as a third party's would be.

Each entry is (plugin name, module). The name is what users block with
``--block NAME`` or ``GAMMADOT_BLOCK_PLUGINS``; the module carries ``@hookimpl`` functions.
"""

# The hook-spec versions the built-in set is written for (gammadot.compat); a built-in module
# may declare its own GAMMADOT_HOOKSPEC instead.
BUILTIN_HOOKSPEC = ">=1,<2"

BUILTIN_PLUGINS: tuple[tuple[str, str], ...] = (
    ("delimited_text", "gammadot.plugins.delimited_text"),
    ("spreadsheet", "gammadot.plugins.spreadsheet"),
    ("json_runs", "gammadot.plugins.json_runs"),
    ("instrument_geometry", "gammadot.plugins.instrument_geometry"),
    ("rotational_geometries", "gammadot.plugins.rotational_geometries"),
    ("direct_indicating", "gammadot.plugins.direct_indicating"),
    ("basic_models", "gammadot.plugins.basic_models"),
    ("yield_stress_models", "gammadot.plugins.yield_stress_models"),
    ("plateau_models", "gammadot.plugins.plateau_models"),
    ("basic_checks", "gammadot.plugins.basic_checks"),
    ("checks_instrument", "gammadot.plugins.checks_instrument"),
    ("checks_inertia", "gammadot.plugins.checks_inertia"),
    ("checks_steady_state", "gammadot.plugins.checks_steady_state"),
    ("checks_curve_shape", "gammadot.plugins.checks_curve_shape"),
    ("checks_thixotropy", "gammadot.plugins.checks_thixotropy"),
    ("checks_fit", "gammadot.plugins.checks_fit"),
    ("replicates", "gammadot.plugins.replicates"),
    ("wall_slip", "gammadot.plugins.wall_slip"),
    ("parquet_tables", "gammadot.plugins.parquet_tables"),
    ("rejected_list", "gammadot.plugins.rejected_list"),
    ("study_site", "gammadot.plugins.study_site"),
    ("field_results_section", "gammadot.plugins.field_results_section"),
)
