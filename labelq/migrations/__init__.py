"""Alembic environment and schema revisions of the labelq store (shipped inside the wheel)."""
