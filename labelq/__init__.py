"""labelq: choose which candidates to label next with a Gaussian-process classifier."""

__version__ = "0.1.0"

# Run from a source checkout (e.g. `python -m labelq` in the repository root, where the checkout's
# labelq/ comes first on sys.path), the top-level folders migrations/ and demo/ are found as
# labelq.migrations and labelq.demo through the package's search path; installed builds map them
# by pyproject.toml's package-dir instead, and this test is false there.
from pathlib import Path as _Path

_CHECKOUT = _Path(__file__).resolve().parent.parent
if (_CHECKOUT / "migrations" / "versions" / "0001_pool_and_labels.py").is_file() and (
        _CHECKOUT / "demo" / "orchard.py").is_file():
    __path__.append(str(_CHECKOUT))
