"""``python -m receiver.cli``: the same as the ``podwatch`` command."""

import sys

from receiver.cli.program import main

sys.exit(main())
