"""``python -m cladewright.cli``: the command line, as the ``cladewright`` script runs it."""

from . import main

main()
