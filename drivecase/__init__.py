"""drivecase command line: the terminal front of the drivecase engine (``models``)."""
