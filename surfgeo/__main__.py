"""``python -m surfgeo`` runs the command line."""

import sys

from surfgeo.cli.main import main

sys.exit(main())
