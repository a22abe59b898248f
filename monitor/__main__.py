"""``python -m monitor`` is the ``monitor`` command."""

import sys

from monitor.cli.main import main

sys.exit(main())
