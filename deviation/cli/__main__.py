"""``python -m deviation.cli``."""

import sys

from deviation.cli.commands import main

sys.exit(main())
