"""Who is labelling (a light module: the quick read path needs it)."""

import getpass
import os


def default_person() -> str:
    """Who is labelling: $LABELQ_BY, else the login name."""
    name = os.environ.get("LABELQ_BY")
    if name:
        return name
    try:
        return getpass.getuser()
    except Exception:  # no login name in some containers
        return "unknown"
