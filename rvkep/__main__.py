import sys

from rvkep.cli import main

sys.exit(main())
