"""resweep.app: the command line, pictures without Qt, and the desktop viewer."""
