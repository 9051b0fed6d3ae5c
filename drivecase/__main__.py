"""Run the drivecase command line as ``python -m drivecase``."""

from drivecase.cli import entry

raise SystemExit(entry())
