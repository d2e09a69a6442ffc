"""`python -m reval.cli`: the same as the `reval` command."""
import sys

from reval.cli.main import main

sys.exit(main())
