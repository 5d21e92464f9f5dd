"""The invented orchard scenario shipped with labelq (all numbers invented).

Source folder ``demo/`` at the top of the repository, beside this scenario's README.md and the
scripted day ``day.sh``; installed as the import package ``labelq.demo`` (a package-dir mapping in
pyproject.toml), so ``labelq demo`` works from a wheel.
"""

from labelq.demo.orchard import FEATURES, GRADES, generate, write_demo_files

__all__ = ["FEATURES", "GRADES", "generate", "write_demo_files"]
