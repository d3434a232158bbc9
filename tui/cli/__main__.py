"""``python -m chaintriage.tui.cli``: the same as the ``chaintriage`` command."""

import sys

from chaintriage.tui.cli.main import main

sys.exit(main())
