"""``python -m tristock.cli``: the ``tristock`` command."""

import sys

from tristock.cli.app import main

sys.exit(main())
