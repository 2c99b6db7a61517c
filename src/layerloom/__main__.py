"""``python -m layerloom`` runs the ``layerloom`` command."""
import sys

from layerloom.cli import main

sys.exit(main())
