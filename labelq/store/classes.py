"""How a class given by a person is matched to a stored class name (a light module: the prompt of
`labelq session` and the CLI use it without loading the store)."""

from collections.abc import Sequence
from difflib import get_close_matches

from labelq.store.errors import UnknownClassError

CLOSE_NAME_CUTOFF = 0.6
"""Similarity ratio (difflib.SequenceMatcher) from which an unknown name suggests a class."""


def resolve_class(given: str, classes: Sequence[str]) -> str:
    """The stored name of the class ``given`` names, trying in turn:

    1. the exact name (so a class literally named "2" is that class, not the second one);
    2. the one name equal to ``given`` when case is ignored (str.casefold);
    3. a number 1..C, the class's position in the order the store was created with.

    Anything else raises UnknownClassError listing the classes with their numbers, and
    suggesting the closest name when one is close (difflib ratio >= 0.6 on case-folded names).
    """
    names = list(classes)
    if given in names:
        return given
    folded = given.casefold()
    same = [name for name in names if name.casefold() == folded]
    if len(same) == 1:
        return same[0]
    if given.isascii() and given.isdigit() and 1 <= int(given) <= len(names):
        return names[int(given) - 1]
    listing = ", ".join(f"{i} {name}" for i, name in enumerate(names, start=1))
    if same:
        raise UnknownClassError(f"class {given!r} matches {' and '.join(map(repr, same))} when "
                                f"case is ignored; give the exact name or its number "
                                f"(classes: {listing})")
    close = get_close_matches(folded, [name.casefold() for name in names], n=1,
                              cutoff=CLOSE_NAME_CUTOFF)
    hint = ""
    if close:
        hint = f"; did you mean {next(n for n in names if n.casefold() == close[0])!r}?"
    raise UnknownClassError(f"unknown class {given!r}{hint} (classes: {listing})")
