"""The compatibility rule between a plugin and gammadot's hook specs.

The hook specs carry a version, :data:`gammadot.hookspecs.HOOKSPEC_VERSION` (``"1.0"``).
A plugin states the versions it was written for in a module (or object) attribute::

    GAMMADOT_HOOKSPEC = ">=1,<2"     # a PEP 440 version specifier

A plugin whose range excludes the running hook specs is refused at start-up, naming the
plugin and both versions; a range that is not a valid specifier is refused too. A plugin
without the attribute is loaded (plugins written before the rule existed keep working) and
``gammadot plugins --check`` warns about it. Built-in plugins declare the range of the whole
built-in set in ``gammadot.plugins.BUILTIN_HOOKSPEC``, or their own.
"""

from __future__ import annotations

from dataclasses import dataclass

from .hookspecs import HOOKSPEC_VERSION

HOOKSPEC_ATTRIBUTE = "GAMMADOT_HOOKSPEC"


@dataclass(frozen=True)
class Compatibility:
    """What a plugin declares and whether it fits: ``declared`` is ``None`` when it says nothing."""

    declared: str | None
    compatible: bool
    problem: str = ""  # one sentence when not compatible


def declared_range(plugin: object, default: str | None = None) -> str | None:
    """The plugin's ``GAMMADOT_HOOKSPEC`` text, else ``default``."""
    value = getattr(plugin, HOOKSPEC_ATTRIBUTE, None)
    return default if value is None else str(value)


def compatibility(plugin: object, *, default: str | None = None,
                  version: str = HOOKSPEC_VERSION) -> Compatibility:
    """Whether ``plugin`` supports hook specs ``version`` (by its declared range)."""
    from packaging.specifiers import InvalidSpecifier, SpecifierSet

    declared = declared_range(plugin, default)
    if declared is None:
        return Compatibility(None, True)
    try:
        supported = SpecifierSet(declared)
    except InvalidSpecifier:
        return Compatibility(declared, False, f"declares {HOOKSPEC_ATTRIBUTE} = {declared!r}, which is not a "
                                              "version range (write e.g. \">=1,<2\")")
    if supported.contains(version, prereleases=True):
        return Compatibility(declared, True)
    return Compatibility(declared, False, f"supports gammadot hook specs {declared}, but this gammadot has "
                                          f"hook specs {version}")
