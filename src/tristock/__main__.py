"""``python -m tristock``: the ``tristock`` command."""

import sys

from tristock.cli.app import main

sys.exit(main())
