"""The `labelq` command line (Typer + Rich): parse, call one library function, render."""
