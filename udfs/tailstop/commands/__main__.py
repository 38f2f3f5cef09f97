"""``python -m tailstop.commands`` runs the ``tailstop`` command."""
import sys

from . import main

sys.exit(main())
