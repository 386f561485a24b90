"""``python -m resonance`` runs the command-line interface."""

import sys

from resonance.cli import main

sys.exit(main())
