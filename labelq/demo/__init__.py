"""The invented orchard scenario shipped with labelq (all numbers invented)."""

from labelq.demo.orchard import FEATURES, GRADES, generate, write_demo_files

__all__ = ["FEATURES", "GRADES", "generate", "write_demo_files"]
