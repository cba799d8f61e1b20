"""`python -m shockslate.server.cli`: the same as the `shockslate` command."""
import sys

from . import main

sys.exit(main())
