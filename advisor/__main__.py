"""``python -m advisor``."""

import sys

from advisor.commands.main import main

sys.exit(main())
