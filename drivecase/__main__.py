"""Run the drivecase command line as ``python -m drivecase``."""

from drivecase.cli import main

raise SystemExit(main())
