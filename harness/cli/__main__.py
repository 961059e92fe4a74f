"""``python -m harness.cli``: the ``linedrop`` command without the console script."""
import sys

from harness.cli.main import main

sys.exit(main())
