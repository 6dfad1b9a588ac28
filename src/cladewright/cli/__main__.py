"""Internal: a part of the command line (run it as the cladewright command).

``python -m cladewright.cli``: the command line, as the ``cladewright`` script runs it."""

from . import main

main()
