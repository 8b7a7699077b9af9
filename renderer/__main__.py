"""``python -m renderer`` runs the ``magretina`` command."""

import sys

from .cli import main

sys.exit(main())
