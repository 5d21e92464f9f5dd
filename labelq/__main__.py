"""`python -m labelq` runs the command line."""

from labelq.cli.app import main

main()
