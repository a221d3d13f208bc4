"""``python -m knotwork_client``: the batch command line (``knotwork-screen``)."""

import sys

from ._cli import main

sys.exit(main())
