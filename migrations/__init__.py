"""Alembic environment and schema revisions of the labelq store.

Source folder ``migrations/`` at the top of the repository; installed as the import package
``labelq.migrations`` (a package-dir mapping in pyproject.toml), so the wheel ships it.
"""
