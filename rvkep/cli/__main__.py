"""``python -m rvkep.cli``: the ``rvkep`` command."""

import sys

from rvkep.cli import main

sys.exit(main())
