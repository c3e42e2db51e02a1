"""``python -m tnsim`` runs the command line."""

import sys

from tnsim.cli import main

sys.exit(main())
