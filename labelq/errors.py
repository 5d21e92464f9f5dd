"""The one exception every user-facing error derives from.

The library raises subclasses of :class:`LabelqError` whose message is a single line fit for a
terminal; the CLI turns them into that line on stderr and exit code 2. Programming errors are
ordinary exceptions and keep their tracebacks.
"""


class LabelqError(Exception):
    """A problem with the user's input or store, described in one line."""
