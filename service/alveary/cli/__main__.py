"""``python -m alveary.cli``: the ``alveary`` command."""

import sys

from alveary.cli._main import main

sys.exit(main())
